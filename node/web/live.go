package web

import (
	"bytes"
	"encoding/json"
	"errors"
	"net/http"
	"strconv"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// liveJSON is the data of a "level" event.
type liveJSON struct {
	Time string `json:"time"`
	LAF  level  `json:"LAF"`
}

// apiLive streams server-sent events until the client leaves or the server stops:
//
//	event: level    data: {"time": ..., "LAF": dB or null}, every LiveInterval
//	event: second   data: one second record as in /api/seconds, for each new one stored
//
// Each write has a deadline of ten intervals (at least 5 s), so a client that stops reading
// frees its slot.
func (s *Server) apiLive(w http.ResponseWriter, r *http.Request) {
	select {
	case s.live <- struct{}{}:
		defer func() { <-s.live }()
	default:
		w.Header().Set("Retry-After", "5")
		writeError(w, http.StatusServiceUnavailable, "too many live pages open at once: close one, or raise the live client limit")
		return
	}
	h := w.Header()
	h.Set("Content-Type", "text/event-stream")
	h.Set("Cache-Control", "no-store")
	h.Set("X-Accel-Buffering", "no") // a buffering proxy in front would hold the events back
	if r.Method == http.MethodHead {
		w.WriteHeader(http.StatusOK)
		return
	}
	rc := http.NewResponseController(w)
	timeout := max(5*time.Second, 10*s.o.LiveInterval)
	var buf bytes.Buffer
	send := func() bool {
		// A writer without deadlines (a test's recorder) sends without one: the write itself
		// still fails when the client goes away.
		if err := rc.SetWriteDeadline(time.Now().Add(timeout)); err != nil && !errors.Is(err, http.ErrNotSupported) {
			return false
		}
		_, err := w.Write(buf.Bytes())
		if err == nil {
			err = rc.Flush()
		}
		buf.Reset()
		return err == nil
	}
	event := func(name string, v any) {
		b, err := json.Marshal(v)
		if err != nil {
			return
		}
		buf.WriteString("event: ")
		buf.WriteString(name)
		buf.WriteString("\ndata: ")
		buf.Write(b)
		buf.WriteString("\n\n")
	}
	buf.WriteString("retry: 2000\n\n")
	var lastSeq uint64
	if s.o.Store != nil {
		lastSeq = s.o.Store.LastSeq(record.KindSecond)
	}
	tick := time.NewTicker(s.o.LiveInterval)
	defer tick.Stop()
	for {
		if s.o.Live != nil {
			l := s.o.Live()
			event("level", liveJSON{Time: stamp(l.At), LAF: level(l.LAF)})
		}
		if s.o.Store != nil {
			if seq := s.o.Store.LastSeq(record.KindSecond); seq > lastSeq {
				// Every second stored since the last tick, in order (held ones included), so
				// the page's chart misses none; after a long stall only the latest 64.
				recs, err := s.o.Store.Recent(record.KindSecond, max(lastSeq, seq-64), 64)
				if err != nil {
					s.log.Warn("live stream: reading new second records", "err", err)
				}
				for _, rec := range recs {
					event("second", secondOf(rec.(*record.Second)))
				}
				lastSeq = seq
			} else if seq < lastSeq {
				lastSeq = seq // a store replaced after damage starts its numbers again
			}
		}
		if buf.Len() == 0 {
			buf.WriteString(": " + strconv.FormatInt(time.Now().Unix(), 10) + "\n\n") // keep-alive comment
		}
		if !send() {
			return
		}
		select {
		case <-r.Context().Done():
			return
		case <-tick.C:
		}
	}
}
