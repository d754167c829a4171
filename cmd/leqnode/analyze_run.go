package main

import (
	"bufio"
	"bytes"
	"context"
	"errors"

	"github.com/leqnode/leqnode/node/lib/analyze"
	"github.com/leqnode/leqnode/node/lib/analyze/resultwriter"
	"github.com/leqnode/leqnode/node/lib/termprogress"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// one measures one recording and returns its output. file, when not empty, is written into
// every line (jsonl, csv) or as a heading (table), for a batch. Results are returned only once
// the whole recording has been read, so that a recording that turns out bad half-way (a NaN
// sample, a truncated file) yields an error and no output that looks like a result.
func (c *analyzeConfig) one(ctx context.Context, std stdio, path, file string, progress func(done, total int64)) ([]byte, error) {
	in, name, done, err := openRecording(std, path)
	if err != nil {
		return nil, err
	}
	defer done()
	r, err := wav.NewReader(bufio.NewReaderSize(in, 1<<16))
	if err != nil {
		return nil, badInput("%s: %v", name, err)
	}
	opts := c.opts
	opts.Progress = progress
	var out bytes.Buffer
	w := resultwriter.New(&out, resultwriter.Options{Format: c.format, Start: c.t0, Stamped: c.stamped, File: file, SummaryOnly: c.only})
	sum, err := analyze.Run(ctx, r, opts, func(iv analyze.Interval) error {
		if iv.Index == 0 {
			w.Begin(r.Format(), opts.Channel, iv.Bands)
		}
		w.Interval(iv.Offset, iv.Result)
		return nil
	})
	if err != nil {
		if errors.Is(err, analyze.ErrNoSamples) {
			return nil, badInput("%s: the recording holds no samples: give a WAV file with audio data", name)
		}
		if errors.Is(err, context.Canceled) {
			return nil, err
		}
		return nil, badInput("%s: %v", name, err)
	}
	w.Summary(&sum.Result)
	return out.Bytes(), nil
}

// batch measures several recordings on up to jobs goroutines and writes their outputs in the
// order of files, each as soon as it and those before it are done. A recording that cannot be
// measured gets its one-line error on standard error and the others go on; the command then
// ends with a usage error (exit 2) that counts them.
func (c *analyzeConfig) batch(ctx context.Context, std stdio, files []string, jobs int) error {
	type result struct {
		out []byte
		err error
	}
	var bar *termprogress.Batch
	if std.errIsTTY {
		bar = termprogress.NewBatch(std.err, len(files))
	}
	var failed int
	var header string // the last CSV header written
	var werr error
	analyze.Ordered(ctx, len(files), jobs, func(ctx context.Context, i int) result {
		var progress func(done, total int64)
		if bar != nil {
			progress = bar.Progress(i)
		}
		out, err := c.one(ctx, std, files[i], files[i], progress)
		if bar != nil {
			bar.Finish(i)
		}
		return result{out, err}
	}, func(i int, r result) {
		if bar != nil {
			bar.Clear()
		}
		if r.err != nil {
			failed++
			if !errors.Is(r.err, context.Canceled) {
				say(std.err, "leqnode analyze: %v\n", r.err)
			}
			return
		}
		out := r.out
		if c.format == "csv" {
			// One header for a run of recordings with the same columns; a new one where the
			// columns change (another sample rate holds other bands).
			h, rest, _ := bytes.Cut(out, []byte("\n"))
			if string(h) == header {
				out = rest
			}
			header = string(h)
		}
		if werr == nil {
			_, werr = std.out.Write(out)
		}
	})
	if bar != nil {
		bar.Clear()
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	if werr != nil {
		return werr
	}
	if failed > 0 {
		return badInput("%d of %d recordings could not be measured (see above); the others are measured", failed, len(files))
	}
	return nil
}
