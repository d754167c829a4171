package buffer

import (
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// TestFullFileSystemTrims: the store's file system fills up while it holds more than a
// megabyte of records. The store gives up its oldest tenth once, keeps within its file from
// then on (deleting its oldest seconds as new ones come), never refuses a record, and checks
// clean; the newest records are all there.
func TestFullFileSystemTrims(t *testing.T) {
	dir := t.TempDir()
	if out, err := exec.Command("mount", "-t", "tmpfs", "-o", "size=3m", "tmpfs", dir).CombinedOutput(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("mounting a tmpfs for the full-disk test: %v: %s", err, out)
		}
		t.Skipf("cannot mount a tmpfs (needs root): %v: %s", err, out)
	}
	t.Cleanup(func() { exec.Command("umount", "-l", dir).Run() })
	s, err := Open(filepath.Join(dir, "node.db"), &Options{NoSync: true, MaxHeld: 256})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	spec := make([]float64, 33)
	var last uint64
	for i := range 40000 {
		r := &record.Second{Start: t0.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 50 + float64(i%20), Spectrum: spec, FirstBand: -19}
		seq, err := s.Append(r)
		if err != nil && !errors.Is(err, ErrNotCommitted) {
			t.Fatalf("record %d: %v", i, err)
		}
		last = seq
	}
	if err := s.Flush(); err != nil {
		t.Fatalf("flush: %v", err)
	}
	if s.SpaceCapped() == 0 {
		t.Fatal("the file system never filled: make the test's records bigger or the tmpfs smaller")
	}
	if err := s.Check(); err != nil {
		t.Fatalf("check: %v", err)
	}
	got, err := s.Last(record.KindSecond)
	if err != nil || got == nil || got.Seq() != last {
		t.Fatalf("last second %v (%v), want seq %d", got, err, last)
	}
	st, _ := s.Stats()
	t.Logf("%d seconds kept of 40000 within %d bytes of records", st.Kinds[record.KindSecond].Count, s.SpaceCapped())
}
