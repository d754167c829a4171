package query

import (
	"context"
	"errors"
	"io"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/export"
)

// Export writes stored records of one kind as CSV or JSON lines (package export).
type Export struct {
	Kind   string `json:"kind"`   // record kind: second, minute, event, calibration, health, gap, annotation or session
	From   string `json:"from"`   // start of the half-open range, RFC 3339 or YYYY-MM-DD; empty: the oldest record
	To     string `json:"to"`     // end of the range, excluded; empty: after the newest record
	Format string `json:"format"` // csv or jsonl; empty: jsonl
	// TimeZone is the IANA zone dates are read in (the node's configured one); empty: the
	// zone of the store's latest session record, else UTC.
	TimeZone string `json:"time_zone,omitempty"`
}

// Check parses the fields that need no store; Do checks them again.
func (e Export) Check() (record.Kind, string, error) {
	if e.Kind == "" {
		return 0, "", BadRequest("give the record kind with --kind (second, minute, event, calibration, health, gap, annotation or session)")
	}
	kind, err := record.ParseKind(e.Kind)
	if err != nil {
		return 0, "", BadRequest("--kind: %v", err)
	}
	format := e.Format
	if format == "" {
		format = export.JSONL
	}
	if format != export.CSV && format != export.JSONL {
		return 0, "", BadRequest("--format %q is not allowed: use one of csv, jsonl", format)
	}
	return kind, format, nil
}

func doExport(ctx context.Context, st *buffer.Store, e Export, w io.Writer) error {
	kind, format, err := e.Check()
	if err != nil {
		return err
	}
	loc := Zone(st, e.TimeZone)
	lo, hi := time.Unix(0, 0), time.Date(2200, 1, 1, 0, 0, 0, 0, time.UTC)
	if e.From != "" {
		if lo, err = ParseWhen("from", e.From, loc); err != nil {
			return err
		}
	}
	if e.To != "" {
		if hi, err = ParseWhen("to", e.To, loc); err != nil {
			return err
		}
	}
	if !lo.Before(hi) {
		return notBefore(lo, hi)
	}
	err = export.Write(ctx, w, st, kind, lo, hi, format)
	if errors.Is(err, context.Canceled) {
		return errors.New("interrupted")
	}
	return err
}
