package capture

import (
	"context"
	"errors"
	"io"
	"testing"
	"time"
)

// TestPump: a Read waiting on a quiet pipe ends with ErrClosed on interrupt and with the
// context's error when it ends; after arm, the data that arrived meanwhile is read in order,
// then the end of file.
func TestPump(t *testing.T) {
	pr, pw := io.Pipe()
	p := newPump(pr)
	p.arm(context.Background())
	res := make(chan error, 1)
	buf := make([]byte, 8)
	go func() { _, err := p.Read(buf); res <- err }()
	time.Sleep(50 * time.Millisecond)
	p.interrupt()
	select {
	case err := <-res:
		if !errors.Is(err, ErrClosed) {
			t.Fatalf("interrupted Read: %v, want ErrClosed", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("interrupt did not end the Read")
	}
	go func() { pw.Write([]byte("abc")); pw.Write([]byte("def")); pw.Close() }()
	ctx, cancel := context.WithCancel(context.Background())
	p.arm(ctx)
	got, err := io.ReadAll(p)
	if err != nil || string(got) != "abcdef" {
		t.Fatalf("after arm: %q, %v; want abcdef", got, err)
	}
	cancel()

	pr2, pw2 := io.Pipe()
	defer pw2.Close()
	p2 := newPump(pr2)
	ctx2, cancel2 := context.WithCancel(context.Background())
	p2.arm(ctx2)
	go func() { _, err := p2.Read(buf); res <- err }()
	cancel2()
	select {
	case err := <-res:
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("Read after cancel: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("the context did not end the Read")
	}
}
