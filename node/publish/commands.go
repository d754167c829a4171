package publish

import (
	"encoding/json"
	"errors"
	"fmt"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// command is a remote command as it arrives on PREFIX/NODE/command:
//
//	{"schema_version": 1, "id": "req-42", "action": "resend",
//	 "from": "2031-05-04T10:00:00Z", "to": "2031-05-04T11:00:00Z", "kinds": ["second", "minute"]}
//
// from, to and kinds belong to resend only (kinds defaults to every data kind). The shape is
// configs/schema/command.schema.json's, key for key: decodeCommand accepts exactly what the
// schema accepts.
type command struct {
	SchemaVersion json.Number `json:"schema_version"`
	ID            string      `json:"id"`
	Action        string      `json:"action"`
	From          *string     `json:"from,omitempty"`
	To            *string     `json:"to,omitempty"`
	Kinds         []string    `json:"kinds,omitempty"`
}

var commandIDRe = regexp.MustCompile(`^[A-Za-z0-9._:-]{1,64}$`)

// commandActions are the actions the schema knows (Config.Commands.Allow picks among them).
var commandActions = []string{ActionCalibrationCheck, ActionPublishStatus, ActionResend}

// resendKinds are the kinds a resend covers by default: all of them but health.
var resendKinds = []record.Kind{record.KindSecond, record.KindMinute, record.KindEvent, record.KindCalibration,
	record.KindGap, record.KindAnnotation, record.KindSession}

// decodeCommand decodes a payload and checks it against the command schema
// (configs/schema/command.schema.json): exact key names, no other keys, schema_version equal
// to SchemaVersion as a number (1 and 1.0 alike, as JSON Schema's const compares), an id, a
// known action, from and to as RFC 3339 date-times for resend only, and 1 to 8 known kinds.
// It returns the resend range parsed; it judges nothing the schema cannot say (see
// parseCommand).
func decodeCommand(b []byte) (c command, from, to time.Time, err error) {
	if err := strict.JSON(b, &c); err != nil {
		return c, from, to, fmt.Errorf("not a command object: %w", err)
	}
	if c.SchemaVersion == "" {
		return c, from, to, errors.New("schema_version missing")
	}
	if !numberIs(string(c.SchemaVersion), SchemaVersion) {
		return c, from, to, fmt.Errorf("schema_version %.20s: want %d", c.SchemaVersion, SchemaVersion)
	}
	if !commandIDRe.MatchString(c.ID) {
		return c, from, to, errors.New("id missing or not 1 to 64 letters, digits, '.', '_', ':' or '-'")
	}
	if !slices.Contains(commandActions, c.Action) {
		return c, from, to, fmt.Errorf("action %.40q unknown: want one of %s", c.Action, strings.Join(commandActions, ", "))
	}
	if c.Action != ActionResend {
		if c.From != nil || c.To != nil || c.Kinds != nil {
			return c, from, to, fmt.Errorf("action %s takes no from, to or kinds", c.Action)
		}
		return c, from, to, nil
	}
	if c.From == nil || c.To == nil {
		return c, from, to, errors.New("resend needs from and to")
	}
	if from, err = strict.ParseTime(*c.From); err != nil {
		return c, from, to, fmt.Errorf("from: %w", err)
	}
	if to, err = strict.ParseTime(*c.To); err != nil {
		return c, from, to, fmt.Errorf("to: %w", err)
	}
	if c.Kinds != nil {
		if len(c.Kinds) == 0 || len(c.Kinds) > len(record.Kinds()) {
			return c, from, to, fmt.Errorf("kinds must list 1 to %d record kinds", len(record.Kinds()))
		}
		for _, s := range c.Kinds {
			if _, err := record.ParseKind(s); err != nil {
				return c, from, to, fmt.Errorf("kinds: unknown kind %.20q", s)
			}
		}
	}
	return c, from, to, nil
}

// numberIs reports whether the JSON number num equals want exactly, as JSON Schema compares
// numbers (1, 1.0, 10e-1 and 0.1e1 are all 1), without turning a large exponent into a large
// computation.
func numberIs(num string, want int64) bool {
	neg := strings.HasPrefix(num, "-")
	num = strings.TrimPrefix(num, "-")
	mant, exps, _ := strings.Cut(strings.ToLower(num), "e")
	ip, fp, _ := strings.Cut(mant, ".")
	digits := strings.TrimLeft(ip+fp, "0")
	if digits == "" {
		return want == 0
	}
	exp := 0
	if exps != "" {
		e, err := strconv.Atoi(exps)
		if err != nil {
			return false // an exponent beyond int: far from any small integer
		}
		exp = e
	}
	trimmed := strings.TrimRight(digits, "0")
	scale := exp - len(fp) + len(digits) - len(trimmed)
	w := strconv.FormatInt(want, 10)
	if (want < 0) != neg {
		return false
	}
	w = strings.TrimPrefix(w, "-")
	wd := strings.TrimRight(w, "0")
	return trimmed == wd && scale == len(w)-len(wd)
}

// parseCommand validates a command payload: size cap, the schema (decodeCommand), then what
// the schema cannot say: an action this node allows and, for resend, a range with to after
// from and at most maxRange long. It returns the command and, for resend, the range and kinds
// (duplicates dropped).
func parseCommand(b []byte, maxBytes int, allow []string, maxRange time.Duration) (c command, from, to time.Time, kinds []record.Kind, err error) {
	if len(b) > maxBytes {
		return c, from, to, nil, fmt.Errorf("payload of %d bytes exceeds the cap of %d", len(b), maxBytes)
	}
	if c, from, to, err = decodeCommand(b); err != nil {
		return c, from, to, nil, err
	}
	if !slices.Contains(allow, c.Action) {
		return c, from, to, nil, fmt.Errorf("action %.40q not allowed on this node (publish.commands.allow)", c.Action)
	}
	if c.Action != ActionResend {
		return c, from, to, nil, nil
	}
	if !to.After(from) || to.Sub(from) > maxRange {
		return c, from, to, nil, fmt.Errorf("range from %s to %s: want to after from and at most %s", *c.From, *c.To, maxRange)
	}
	if c.Kinds == nil {
		return c, from, to, resendKinds, nil
	}
	for _, s := range c.Kinds {
		k, _ := record.ParseKind(s) // checked by decodeCommand
		if !slices.Contains(kinds, k) {
			kinds = append(kinds, k)
		}
	}
	return c, from, to, kinds, nil
}

// command handles one payload from the command topic. Anything invalid is ignored, with a log
// line at most once a minute.
func (p *Publisher) command(s *session, b []byte) {
	now := time.Now()
	c, from, to, kinds, err := parseCommand(b, p.cfg.Commands.MaxPayloadBytes, p.cfg.Commands.Allow, time.Duration(p.cfg.Commands.MaxResendRange))
	if err != nil {
		if ok, held := p.ignored.allow(now); ok {
			p.log.Warn("ignored a message on the command topic", "topic", p.topics.command, "bytes", len(b), "why", err, "ignored_since_last_log", held)
		}
		return
	}
	p.log.Info("remote command", "id", c.ID, "action", c.Action)
	switch c.Action {
	case ActionPublishStatus:
		p.publishStatus(s)
		p.reply(s, c, "done", "")
	case ActionCalibrationCheck:
		select {
		case p.requests <- Request{ID: c.ID, Action: c.Action, Received: now}:
			p.reply(s, c, "accepted", "the node runs the check; its result arrives as a calibration record")
		default:
			p.reply(s, c, "busy", "earlier requests are still waiting; try again later")
		}
	case ActionResend:
		if len(p.jobs) >= 4 {
			p.reply(s, c, "busy", "four resends are already queued; try again later")
			return
		}
		kinds = slices.DeleteFunc(kinds, func(k record.Kind) bool { return p.lanes[int(k)-1].off })
		if len(kinds) == 0 {
			p.reply(s, c, "failed", "none of the kinds asked for is published (publish.kinds)")
			return
		}
		p.jobs = append(p.jobs, &resendJob{cmd: c, kinds: kinds, from: from, to: to, pos: from})
		p.reply(s, c, "accepted", "")
	}
}

// reply publishes a reply to command c on PREFIX/NODE/reply (QoS 1, not waited for).
func (p *Publisher) reply(s *session, c command, result, msg string) {
	w := jw{}
	w.open()
	w.key("schema_version")
	w.int(SchemaVersion)
	w.key("kind")
	w.str("reply")
	w.key("node")
	w.str(p.id.NodeID)
	w.key("store")
	w.str(p.store.ID())
	w.key("id")
	w.str(c.ID)
	w.key("action")
	w.str(c.Action)
	w.key("result")
	w.str(result)
	if msg != "" {
		w.key("message")
		w.str(msg)
	}
	w.times("time", time.Now())
	w.close()
	s.client.Publish(p.topics.reply, 1, false, w.b)
}

// resendJob is a resend command being carried out: kinds in turn, each in time order.
type resendJob struct {
	cmd      command
	kinds    []record.Kind
	from, to time.Time
	ki       int       // index of the kind being sent
	pos      time.Time // time of the last record read (or from)
	posSeq   uint64    // its sequence number (0 before the first)
	buf      []record.Record
	drained  bool // every record of the current kind has been read
	inflight int
	sent     int
	failed   int
}

// nextResend returns the next resend message, or a nil payload when none is ready.
func (p *Publisher) nextResend(s *session) (message, []byte) {
	for len(p.jobs) > 0 {
		j := p.jobs[0]
		for len(j.buf) == 0 && j.ki < len(j.kinds) {
			if j.drained {
				j.ki++
				j.pos, j.posSeq, j.drained = j.from, 0, false
				continue
			}
			p.fillResend(j)
		}
		if len(j.buf) == 0 {
			p.finishJobs(s)
			if len(p.jobs) > 0 && p.jobs[0] == j {
				return message{}, nil // waiting for the last acknowledgements
			}
			continue
		}
		k := j.kinds[j.ki]
		var recs []record.Record
		recs, j.buf = take(j.buf, p.batch(k))
		j.sent += len(recs)
		e := p.envelope(DeliveryResend)
		e.request = j.cmd.ID
		return message{kind: k, lo: recs[0].Seq(), hi: recs[len(recs)-1].Seq(), job: j}, p.encode(e, recs)
	}
	return message{}, nil
}

// fillResend reads the next chunk of the current kind of j in time order.
func (p *Publisher) fillResend(j *resendJob) {
	k := j.kinds[j.ki]
	n := 0
	err := p.store.Range(k, j.pos, j.to, func(r record.Record) error {
		if r.Time().Equal(j.pos) && r.Seq() <= j.posSeq {
			return nil
		}
		j.buf = append(j.buf, r)
		j.pos, j.posSeq = r.Time(), r.Seq()
		if n++; n >= fetchChunk {
			return errStop
		}
		return nil
	})
	if err != nil && !errors.Is(err, errStop) {
		p.storeError(err)
		j.drained = true
		return
	}
	if !errors.Is(err, errStop) {
		j.drained = true
	}
}

// finishJobs replies "done" for the finished resend at the head of the queue.
func (p *Publisher) finishJobs(s *session) {
	for len(p.jobs) > 0 {
		j := p.jobs[0]
		if j.ki < len(j.kinds) || len(j.buf) > 0 || j.inflight > 0 {
			return
		}
		result, msg := "done", fmt.Sprintf("%d records sent", j.sent)
		if j.failed > 0 {
			result, msg = "failed", fmt.Sprintf("%d records sent, %d messages lost with the connection: send the command again", j.sent, j.failed)
		}
		p.reply(s, j.cmd, result, msg)
		p.jobs = p.jobs[1:]
	}
}
