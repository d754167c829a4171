package node

import (
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// A sideChain is a measurement that runs beside the meter on the processing goroutine: the
// noise events (eventChain), the calibrator watch (calChain) and the health checks
// (healthChain). Each keeps its own state; the processor keeps the clock anchoring, the cutting
// of the stream into seconds on the sample clock and the flags of each second, and drives every
// side-chain the same way:
//
//   - open when a source (re)opens, at sample rate fs, before the meter is made;
//   - skip for samples lost before the next block (the sample count moves on without them);
//   - block with each block of samples before the meter measures it, then measured after;
//   - second with each closed second, after its record was stored;
//   - flush when the stream ends or breaks (device lost, clock fault, node stopping).
//
// The calls run on the processing goroutine, so they must not block: no file I/O (a side-chain
// that must write a file hands the write to a goroutine of the node, as calChain does with the
// sensitivity state), no waiting on other goroutines. Store appends go through the processor,
// which handles a failing store. An error returned stops the node: it is kept for faults the
// node cannot measure on after (a store that refuses records for a reason other than a full
// disk, a detector that cannot be made for the stream's rate).
type sideChain interface {
	open(fs float64) error
	skip(k int64)
	block(x []float32) error
	measured() error
	second(rec *record.Second, r *dsp.Result) error
	flush() error
}

var (
	_ sideChain = (*eventChain)(nil)
	_ sideChain = (*calChain)(nil)
	_ sideChain = (*healthChain)(nil)
)
