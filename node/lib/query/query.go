// Package query answers the reading commands of leqnode (export, db check, report) against an
// open store, wherever the store is open: in the command's own process, or inside the running
// daemon, which holds the file for writing, when a command asks through the control socket.
//
// # Model
//
// A Request is plain data that names one command and its parameters as the user gave them
// (times as written, RFC 3339 or a date; formats by name), so that it can cross the control
// socket as JSON and be answered by the same code on either side. Do checks the request,
// resolves what needs the store (the time zone dates are read in, from the configuration or
// else from the store's latest session record), runs the command against a *buffer.Store and
// writes its output to an io.Writer as it goes.
//
// Errors are values: a request that cannot be answered as given wraps ErrBadRequest (the
// command line exits with status 2); any other error is a failure at run time (status 1).
// Messages are one line that names the thing and the fix, in the terms of the command's flags.
package query

import (
	"context"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// ErrBadRequest marks a request that cannot be answered as given: a field that does not parse
// or is out of range. errors.Is(err, ErrBadRequest) tells it from a failure at run time.
var ErrBadRequest = errors.New("bad request")

// badRequest is an error that wraps ErrBadRequest and whose message is exactly the one given.
type badRequest struct{ err error }

func (e badRequest) Error() string        { return e.err.Error() }
func (e badRequest) Unwrap() error        { return e.err }
func (e badRequest) Is(target error) bool { return target == ErrBadRequest }

// BadRequest returns an error with the formatted message that wraps ErrBadRequest (and any
// error among a that %w names).
func BadRequest(format string, a ...any) error {
	return badRequest{fmt.Errorf(format, a...)}
}

// Request is one reading command: exactly one of its fields is set.
type Request struct {
	Export *Export `json:"export,omitempty"`
	Check  *Check  `json:"check,omitempty"`
	Report *Report `json:"report,omitempty"`
}

// Name returns the command the request holds ("export", "db check", "report"), or "" when it
// holds none or more than one.
func (r Request) Name() string {
	name, n := "", 0
	if r.Export != nil {
		name, n = "export", n+1
	}
	if r.Check != nil {
		name, n = "db check", n+1
	}
	if r.Report != nil {
		name, n = "report", n+1
	}
	if n != 1 {
		return ""
	}
	return name
}

// Do answers req against st, writing the command's output to w. TimeZone fields left empty
// read dates in the zone of the store's latest session record, else UTC.
func Do(ctx context.Context, st *buffer.Store, req Request, w io.Writer) error {
	switch {
	case req.Name() == "":
		return BadRequest("a request holds exactly one command: export, check or report")
	case req.Export != nil:
		return doExport(ctx, st, *req.Export, w)
	case req.Check != nil:
		return doCheck(st, *req.Check, w)
	default:
		return doReport(ctx, st, *req.Report, w)
	}
}

// Zone returns the time zone dates are read in: the named one (the node's configured zone),
// else that of the store's latest session record, else UTC. A name that is not a zone counts
// as none.
func Zone(st *buffer.Store, name string) *time.Location {
	if name == "" {
		if r, err := st.Last(record.KindSession); err == nil && r != nil {
			name = r.(*record.Session).TimeZone
		}
	}
	if name != "" {
		if l, err := time.LoadLocation(name); err == nil {
			return l
		}
	}
	return time.UTC
}

// ParseWhen parses the value v of the time flag named flag: RFC 3339, or a date YYYY-MM-DD
// meaning its midnight in loc. An error wraps ErrBadRequest.
func ParseWhen(flag, v string, loc *time.Location) (time.Time, error) {
	if t, err := strict.ParseTime(v); err == nil {
		return t, nil
	}
	if t, err := time.ParseInLocation(time.DateOnly, v, loc); err == nil {
		return t, nil
	}
	return time.Time{}, BadRequest("--%s %q is not a time: write RFC 3339 (2026-05-04T07:00:00Z) or a date (2026-05-04, in zone %s)", flag, v, loc)
}

// notBefore is the error of a range whose start is not before its end.
func notBefore(lo, hi time.Time) error {
	return BadRequest("--from %s is not before --to %s: the range is half-open [from, to)", lo.Format(time.RFC3339), hi.Format(time.RFC3339))
}
