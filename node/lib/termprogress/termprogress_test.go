package termprogress_test

import (
	"bytes"
	"fmt"
	"strings"
	"sync"
	"testing"

	"github.com/leqnode/leqnode/node/lib/termprogress"
	"github.com/leqnode/leqnode/node/testrig"
)

func TestBar(t *testing.T) {
	for _, tc := range []struct {
		done, total int64
		want        string
	}{
		{0, 100, "\r[........................................]   0%"},
		{25, 100, "\r[##########..............................]  25%"},
		{100, 100, "\r[########################################] 100%"},
		{4800, -1, "\r4800 frames read"}, // a stream of unknown length
	} {
		var b bytes.Buffer
		termprogress.Bar(&b)(tc.done, tc.total)
		if b.String() != tc.want {
			t.Errorf("Bar(%d of %d) = %q, want %q", tc.done, tc.total, b.String(), tc.want)
		}
	}
}

// TestBatch: recordings read at once share one bar; one of unknown length counts as the mean
// of the known ones until it finishes.
func TestBatch(t *testing.T) {
	var out testrig.SyncBuffer
	b := termprogress.NewBatch(&out, 3)
	var wg sync.WaitGroup
	for i := range 3 {
		p := b.Progress(i)
		wg.Go(func() {
			for f := int64(0); f <= 1000; f += 100 {
				p(f, 1000)
			}
		})
	}
	wg.Wait()
	b.Finish(0)
	b.Finish(1)
	b.Finish(2)
	b.Clear()
	s := out.String()
	if !strings.Contains(s, "] 100%  3/3 recordings") || !strings.HasSuffix(s, "\r\033[K") {
		t.Errorf("batch bar output ends %q", s[max(0, len(s)-80):])
	}

	var half bytes.Buffer
	b = termprogress.NewBatch(&half, 2)
	b.Progress(0)(500, 1000) // drawn at once: the first call
	b.Progress(1)(10, -1)    // unknown length: counts as 1000, of which nothing is known done
	b.Finish(0)
	if !strings.HasSuffix(half.String(), "\r[####################....................]  50%  1/2 recordings") {
		t.Errorf("after one of two finished: %q", half.String())
	}
}

// Example draws the bar of a recording half read; on a terminal the carriage return makes
// each call redraw the same line.
func Example() {
	var term strings.Builder // os.Stderr, when it is a terminal
	bar := termprogress.Bar(&term)
	bar(48000, 96000)
	fmt.Printf("%q\n", term.String())
	// Output: "\r[####################....................]  50%"
}
