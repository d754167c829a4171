package analyze

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
)

// Inputs expands the arguments of a batch into recordings, in order: a file stands for itself,
// a directory for every file below it whose name ends in .wav (any case), in lexical order of
// their paths (hidden files and directories, whose names start with a dot, are skipped). An
// argument that does not exist, or a directory without a WAV file, is an error naming it.
func Inputs(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		st, err := os.Stat(a)
		if err != nil {
			var pe *fs.PathError
			if errors.As(err, &pe) {
				err = pe.Err
			}
			return nil, fmt.Errorf("%s: cannot open: %w", a, err)
		}
		if !st.IsDir() {
			out = append(out, a)
			continue
		}
		var found []string
		err = filepath.WalkDir(a, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if p != a && strings.HasPrefix(d.Name(), ".") {
				if d.IsDir() {
					return filepath.SkipDir
				}
				return nil
			}
			if !d.IsDir() && strings.EqualFold(filepath.Ext(p), ".wav") {
				found = append(found, p)
			}
			return nil
		})
		if err != nil {
			return nil, fmt.Errorf("%s: cannot read the directory: %w", a, err)
		}
		if len(found) == 0 {
			return nil, fmt.Errorf("%s: the directory holds no .wav file: name the recordings or a directory that holds them", a)
		}
		sort.Strings(found)
		out = append(out, found...)
	}
	return out, nil
}

// Ordered runs work(ctx, i) for every i from 0 to n-1 on up to jobs goroutines at once and
// hands the results to emit on the calling goroutine, in order of i, each as soon as it and
// all before it are done. At most 2·jobs results wait for their turn, so memory stays bounded
// however many inputs there are. When ctx is cancelled no new work starts; the work already
// started is expected to notice ctx and return. Ordered returns when every started work item
// has been emitted (items are handed out in order, so the emitted ones are always the first k).
//
// Work items must be independent: each gets its own inputs and writes only its own result, so
// the results are the same as one at a time, whatever jobs is.
func Ordered[T any](ctx context.Context, n, jobs int, work func(ctx context.Context, i int) T, emit func(i int, r T)) {
	jobs = max(1, min(jobs, n))
	window := 2 * jobs
	type done struct {
		i int
		r T
	}
	results := make(chan done, window)
	tokens := make(chan struct{}, window) // one per started item not yet emitted
	next := make(chan int)
	var wg sync.WaitGroup
	for range jobs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				results <- done{i, work(ctx, i)}
			}
		}()
	}
	go func() {
		defer close(next)
		for i := range n {
			select {
			case tokens <- struct{}{}:
			case <-ctx.Done():
				return
			}
			if ctx.Err() != nil {
				<-tokens
				return
			}
			next <- i
		}
	}()
	go func() {
		wg.Wait()
		close(results)
	}()
	pending := make(map[int]T, window)
	want := 0
	for d := range results {
		pending[d.i] = d.r
		for {
			r, ok := pending[want]
			if !ok {
				break
			}
			delete(pending, want)
			emit(want, r)
			want++
			<-tokens
		}
	}
}
