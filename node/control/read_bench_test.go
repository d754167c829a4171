package control

import (
	"context"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/query"
)

// BenchmarkReadExport compares second records with one-third-octave spectra
// exported as JSON lines from the store directly (query.Do) and through the control socket
// (Client.Read against a server that calls query.Do): the socket's cost is the HTTP framing and
// the copy through the Unix socket. Ten minutes of records unless LEQNODE_BENCH_HOURS (make
// bench sets 24) asks for more.
func BenchmarkReadExport(b *testing.B) {
	n := 600
	if h, err := strconv.ParseFloat(os.Getenv("LEQNODE_BENCH_HOURS"), 64); err == nil && h > 0 {
		n = int(h * 3600)
	}
	t0 := time.Date(2031, 5, 4, 7, 0, 0, 0, time.UTC)
	st, err := buffer.Open(filepath.Join(b.TempDir(), "wendle-cross-09.db"), &buffer.Options{NoSync: true, Now: func() time.Time { return t0.Add(2 * time.Hour) }})
	if err != nil {
		b.Fatal(err)
	}
	defer func() {
		if err := st.Close(); err != nil {
			b.Error(err)
		}
	}()
	for i := range n {
		s := &record.Second{Start: t0.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 55 + float64(i%20)/10,
			FirstBand: -17, Spectrum: make([]float64, 31)}
		for k := range s.Spectrum {
			s.Spectrum[k] = 30 + float64(k)
		}
		if _, err := st.Append(s); err != nil {
			b.Fatal(err)
		}
	}
	if err := st.Flush(); err != nil {
		b.Fatal(err)
	}
	req := query.Request{Export: &query.Export{Kind: "second"}}
	b.Run("direct", func(b *testing.B) {
		for b.Loop() {
			if err := query.Do(context.Background(), st, req, io.Discard); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("socket", func(b *testing.B) {
		s := startServer(b, b.TempDir(), -1, Handlers{Read: func(ctx context.Context, r query.Request, w io.Writer) error {
			return query.Do(ctx, st, r, w)
		}})
		c := NewClient(s.Path())
		for b.Loop() {
			if err := c.Read(context.Background(), req, io.Discard); err != nil {
				b.Fatal(err)
			}
		}
	})
}
