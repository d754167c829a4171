package analyze

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

func TestInputs(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"b/2.wav", "b/1.WAV", "a.wav", "notes.txt", ".hidden/x.wav", "b/.skip.wav", "c/d/e.wav"} {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, nil, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.MkdirAll(filepath.Join(dir, "empty"), 0o755); err != nil {
		t.Fatal(err)
	}
	single := filepath.Join(dir, "notes.txt")
	got, err := Inputs([]string{single, dir})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{single}
	for _, name := range []string{"a.wav", "b/1.WAV", "b/2.wav", "c/d/e.wav"} {
		want = append(want, filepath.Join(dir, name))
	}
	if !slices.Equal(got, want) {
		t.Errorf("Inputs = %q, want %q", got, want)
	}
	for _, tc := range []struct{ arg, text string }{
		{filepath.Join(dir, "missing.wav"), "missing.wav: cannot open"},
		{filepath.Join(dir, "empty"), "holds no .wav file"},
	} {
		if _, err := Inputs([]string{tc.arg}); err == nil || !strings.Contains(err.Error(), tc.text) {
			t.Errorf("Inputs(%s): %v, want an error with %q", tc.arg, err, tc.text)
		}
	}
}

// TestOrdered: results come out in input order whatever order the work finishes in, with any
// number of workers, and no more than the allowed number wait.
func TestOrdered(t *testing.T) {
	for _, jobs := range []int{1, 2, 5, 100} {
		var got []int
		Ordered(context.Background(), 20, jobs, func(_ context.Context, i int) int {
			time.Sleep(time.Duration((i*7)%5) * time.Millisecond) // later items often finish first
			return i * i
		}, func(i, r int) {
			if r != i*i {
				t.Errorf("jobs %d: item %d got result %d", jobs, i, r)
			}
			got = append(got, i)
		})
		if len(got) != 20 || !slices.IsSorted(got) {
			t.Errorf("jobs %d: emitted %v, want 0 to 19 in order", jobs, got)
		}
	}
}

// TestOrderedCancel: after cancellation no new work starts, and what started is emitted in order.
func TestOrderedCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	var got []int
	Ordered(ctx, 1000, 2, func(ctx context.Context, i int) int {
		if i == 5 {
			cancel()
		}
		return i
	}, func(i, _ int) { got = append(got, i) })
	if len(got) >= 1000 || !slices.IsSorted(got) {
		t.Errorf("emitted %d items after cancellation (want far fewer than 1000, in order)", len(got))
	}
	for k, i := range got {
		if i != k {
			t.Fatalf("emitted %v: not the first %d items", got, len(got))
		}
	}
}

// ExampleOrdered measures recordings (here: squares) on two workers and prints the results in
// input order, whichever finishes first.
func ExampleOrdered() {
	inputs := []float64{3, 1, 4, 1, 5}
	Ordered(context.Background(), len(inputs), 2, func(_ context.Context, i int) float64 {
		return inputs[i] * inputs[i]
	}, func(i int, r float64) {
		fmt.Printf("%d: %g\n", i, r)
	})
	// Output:
	// 0: 9
	// 1: 1
	// 2: 16
	// 3: 1
	// 4: 25
}
