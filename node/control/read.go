package control

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"

	"github.com/leqnode/leqnode/node/lib/query"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// ErrBadRequest marks a reading command the daemon refused as given: it is query.ErrBadRequest,
// so that a caller tests one sentinel whether the store was read in its own process or by the
// daemon. The command line exits with status 2.
var ErrBadRequest = query.ErrBadRequest

// ErrFailed marks a reading command that failed inside the daemon at run time (a store read, a
// file that could not be written). The command line exits with status 1.
var ErrFailed = errors.New("failed in the daemon")

// The kinds of outcome on the wire.
const (
	kindOK         = "ok"
	kindBadRequest = "bad_request"
	kindFailed     = "failed"
)

// outcome is the wire form of a read's outcome: the trailer Leqnode-Outcome, or the body of a
// refused request.
type outcome struct {
	Kind    string `json:"kind"`
	Message string `json:"message,omitempty"`
}

// outcomeOf is the wire form of err.
func outcomeOf(err error) outcome {
	switch {
	case err == nil:
		return outcome{Kind: kindOK}
	case errors.Is(err, ErrBadRequest):
		return outcome{kindBadRequest, oneLine(err)}
	default:
		return outcome{kindFailed, oneLine(err)}
	}
}

func oneLine(err error) string { return strings.ReplaceAll(err.Error(), "\n", " ") }

// header encodes the outcome for a header field: JSON with every byte outside printable ASCII
// escaped, so that no message can break the field.
func (o outcome) header() string {
	b, err := json.Marshal(o)
	if err != nil { // a struct of two strings always encodes
		return `{"kind":"failed","message":"the outcome could not be encoded"}`
	}
	var sb strings.Builder
	for _, r := range string(b) {
		if r < 0x20 || r > 0x7e {
			if r > 0xffff {
				r1, r2 := surrogates(r)
				fmt.Fprintf(&sb, `\u%04x\u%04x`, r1, r2)
				continue
			}
			fmt.Fprintf(&sb, `\u%04x`, r)
			continue
		}
		sb.WriteRune(r)
	}
	return sb.String()
}

// surrogates splits a rune above U+FFFF into its UTF-16 surrogate pair (RFC 8259 section 7).
func surrogates(r rune) (rune, rune) {
	r -= 0x10000
	return 0xd800 + (r>>10)&0x3ff, 0xdc00 + r&0x3ff
}

// Error is a reading command's failure as the daemon reported it. errors.Is matches it with
// ErrBadRequest or ErrFailed, by its kind; its message is the daemon's one line.
type Error struct {
	Kind    string // "bad_request" or "failed"
	Message string
}

func (e *Error) Error() string { return e.Message }

// Is reports whether the error is of target's kind.
func (e *Error) Is(target error) bool {
	switch e.Kind {
	case kindBadRequest:
		return target == ErrBadRequest
	default:
		return target == ErrFailed
	}
}

func (o outcome) err() error {
	if o.Kind == kindOK {
		return nil
	}
	return &Error{Kind: o.Kind, Message: o.Message}
}

// maxRequest is the largest request body taken.
const maxRequest = 64 << 10

// read serves POST /read: one query.Request in the body, the command's output as the answer's
// body, its outcome in the trailer.
func (s *Server) read(w http.ResponseWriter, r *http.Request, answer func(context.Context, query.Request, io.Writer) error) {
	refuse := func(status int, o outcome) {
		w.Header().Set("Content-Type", "application/json")
		w.WriteHeader(status)
		if err := json.NewEncoder(w).Encode(o); err != nil {
			s.log.Debug("control socket: the refusal was not delivered", "err", err)
		}
	}
	if answer == nil {
		refuse(http.StatusNotFound, outcome{kindFailed, "this daemon answers no reading commands"})
		return
	}
	body, err := io.ReadAll(io.LimitReader(r.Body, maxRequest+1))
	if err == nil && len(body) > maxRequest {
		err = errors.New("longer than 64 KiB")
	}
	var req query.Request
	if err == nil {
		err = strict.JSON(body, &req)
	}
	if err != nil {
		refuse(http.StatusBadRequest, outcome{kindBadRequest, "the body must be one reading request in JSON (export, check or report): " + oneLine(err)})
		return
	}
	if req.Name() == "" {
		refuse(http.StatusBadRequest, outcome{kindBadRequest, "a reading request holds exactly one command: export, check or report"})
		return
	}
	w.Header().Set("Trailer", "Leqnode-Outcome")
	w.Header().Set("Content-Type", "application/octet-stream")
	err = answer(r.Context(), req, w)
	if err != nil {
		s.log.Info("control socket: a reading command ended with an error", "command", req.Name(), "err", err)
	}
	w.Header().Set("Leqnode-Outcome", outcomeOf(err).header())
}

// Read sends a reading command to the daemon, copies its output to w as it comes, and returns
// its outcome: nil, an *Error (errors.Is ErrBadRequest or ErrFailed), or an error of the
// connection.
func (c *Client) Read(ctx context.Context, req query.Request, w io.Writer) error {
	body, err := json.Marshal(req)
	if err != nil {
		return fmt.Errorf("control socket %s: the request: %w", c.path, err)
	}
	hr, err := http.NewRequestWithContext(ctx, http.MethodPost, "http://leqnode/read", strings.NewReader(string(body)))
	if err != nil {
		return fmt.Errorf("control socket %s: %w", c.path, err)
	}
	hr.Header.Set("Content-Type", "application/json")
	resp, err := c.hc.Do(hr)
	if err != nil {
		return fmt.Errorf("control socket %s: %w", c.path, err)
	}
	defer closeBody(resp.Body)
	if resp.StatusCode != http.StatusOK {
		b, err := io.ReadAll(io.LimitReader(resp.Body, 4096))
		if err != nil {
			return fmt.Errorf("control socket %s: %w", c.path, err)
		}
		var o outcome
		if err := json.Unmarshal(b, &o); err != nil || o.Kind == "" || o.Kind == kindOK {
			return fmt.Errorf("control socket %s: %s (%s)", c.path, strings.TrimSpace(string(b)), resp.Status)
		}
		return o.err()
	}
	if _, err := io.Copy(w, resp.Body); err != nil {
		return fmt.Errorf("control socket %s: %w", c.path, err)
	}
	t := resp.Trailer.Get("Leqnode-Outcome")
	if t == "" {
		return &Error{Kind: kindFailed, Message: fmt.Sprintf("control socket %s: the daemon ended the answer early", c.path)}
	}
	var o outcome
	if err := json.Unmarshal([]byte(t), &o); err != nil || o.Kind == "" {
		return fmt.Errorf("control socket %s: an outcome that is not the daemon's: %q", c.path, t)
	}
	return o.err()
}

// closeBody closes an answer's body after it was read: its error says nothing about the answer.
func closeBody(b io.Closer) { _ = b.Close() }
