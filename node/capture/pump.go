package capture

import (
	"context"
	"io"
	"sync"
)

// pump makes a reader whose Read may wait for ever (standard input from a pipe whose writer has
// gone quiet but not closed it, a terminal) interruptible: one goroutine reads ahead into one of
// two 64 KiB buffers, and Read takes from them or returns ErrClosed as soon as the source is
// closed or its context ends, instead of waiting for input that may never come. The goroutine
// stays blocked in the underlying Read until input or end of file arrives: standard input
// cannot be unblocked from inside the process, so it is left behind, harmless, when the
// process exits. Nothing read is lost: data that arrives while the source is closed waits for
// the next Open.
type pump struct {
	data chan chunk  // filled buffers, in order
	free chan []byte // empty buffers for the reading goroutine

	cur chunk // the buffer being consumed
	off int

	mu   sync.Mutex
	ctx  context.Context
	stop chan struct{} // closed by interrupt
}

type chunk struct {
	b   []byte
	err error
}

func newPump(r io.Reader) *pump {
	p := &pump{data: make(chan chunk, 2), free: make(chan []byte, 2), stop: make(chan struct{}), ctx: context.Background()}
	p.free <- make([]byte, 64<<10)
	p.free <- make([]byte, 64<<10)
	go func() {
		for b := range p.free {
			var n int
			var err error
			for n == 0 && err == nil {
				n, err = r.Read(b)
			}
			p.data <- chunk{b[:n], err}
			if err != nil {
				return
			}
		}
	}()
	return p
}

// arm sets the context of the reads that follow and clears an interrupt.
func (p *pump) arm(ctx context.Context) {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.ctx = ctx
	select {
	case <-p.stop:
		p.stop = make(chan struct{})
	default:
	}
}

// interrupt ends a Read that waits, and every Read until the next arm, with ErrClosed.
func (p *pump) interrupt() {
	p.mu.Lock()
	defer p.mu.Unlock()
	select {
	case <-p.stop:
	default:
		close(p.stop)
	}
}

func (p *pump) Read(b []byte) (int, error) {
	if len(b) == 0 {
		return 0, nil
	}
	for p.off >= len(p.cur.b) {
		if p.cur.err != nil {
			return 0, p.cur.err
		}
		if p.cur.b != nil {
			p.free <- p.cur.b[:cap(p.cur.b)]
			p.cur = chunk{}
		}
		p.mu.Lock()
		ctx, stop := p.ctx, p.stop
		p.mu.Unlock()
		select {
		case c := <-p.data:
			p.cur, p.off = c, 0
			if len(c.b) == 0 && c.err != nil {
				return 0, c.err
			}
		case <-stop:
			return 0, ErrClosed
		case <-ctx.Done():
			return 0, ctx.Err()
		}
	}
	n := copy(b, p.cur.b[p.off:])
	p.off += n
	return n, nil
}
