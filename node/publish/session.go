package publish

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
	"github.com/leqnode/leqnode/buffer/record"
)

// fetchChunk is the number of records read from the store per read transaction.
const fetchChunk = 256

// lane is the delivery state of one record kind. Messages cover contiguous sequence ranges;
// the store's cursor (acked) moves only over ranges the broker acknowledged.
type lane struct {
	kind  record.Kind
	off   bool   // the kind is not published (Config.Kinds)
	acked uint64 // the store's cursor for this kind, as last acknowledged
	done  spans  // ranges above acked that were delivered (or hold no record), in memory only

	boundary uint64          // sequence numbers up to this one are backlog in this connection
	bpos     uint64          // last backlog sequence number examined
	bbuf     []record.Record // backlog records read and not yet sent
	lpos     uint64          // last live sequence number examined
	lbuf     []record.Record // live records read and not yet sent
	lwait    time.Time       // when a partial batch of live seconds was first held back
}

// message is one published data message: the records of one kind with sequence numbers in [lo, hi].
type message struct {
	kind   record.Kind
	lo, hi uint64
	bytes  int
	job    *resendJob // non-nil for resend messages, which move no cursor
}

type result struct {
	m   message
	err error
}

// session is one connection to one broker.
type session struct {
	client   mqtt.Client
	broker   string
	lost     chan error
	done     chan struct{}
	results  chan result
	inflight int
}

var errStop = errors.New("stop")

// session connects to broker and publishes until the connection fails or ctx ends. connected
// reports whether the connection was made.
func (p *Publisher) session(ctx context.Context, broker string) (connected bool, err error) {
	s := &session{
		broker:  broker,
		lost:    make(chan error, 1),
		done:    make(chan struct{}),
		results: make(chan result, p.cfg.MaxInFlight+8),
	}
	opts := mqtt.NewClientOptions().
		AddBroker(broker).
		SetClientID(p.cfg.ClientID).
		SetProtocolVersion(4).
		SetKeepAlive(time.Duration(p.cfg.KeepAlive)).
		SetPingTimeout(min(time.Duration(p.cfg.KeepAlive), 10*time.Second)).
		SetConnectTimeout(time.Duration(p.cfg.ConnectTimeout)).
		SetWriteTimeout(time.Duration(p.cfg.ConnectTimeout)).
		SetCleanSession(!p.cfg.PersistentSession).
		SetAutoReconnect(false). // reconnecting is ours: the store's cursor is the only queue
		SetConnectRetry(false).
		SetOrderMatters(false).
		SetStore(mqtt.NewMemoryStore()).
		SetBinaryWill(p.topics.status, p.appendStatus(nil, "offline", false), 1, true).
		SetConnectionLostHandler(func(_ mqtt.Client, err error) {
			select {
			case s.lost <- err:
			default:
			}
		}).
		SetOnConnectHandler(func(c mqtt.Client) {
			// Subscriptions are made on every connection (a clean session forgets them).
			if !p.cfg.Commands.Enabled {
				return
			}
			tok := c.Subscribe(p.topics.command, 1, func(_ mqtt.Client, m mqtt.Message) {
				select {
				case p.cmdIn <- m.Payload():
				default: // a flood of commands: drop
				}
			})
			if tok.WaitTimeout(time.Duration(p.cfg.ConnectTimeout)) && tok.Error() == nil {
				return
			}
			err := tok.Error()
			if err == nil {
				err = errors.New("timed out")
			}
			p.log.Error("cannot subscribe to the command topic; remote commands are off until the next connection", "topic", p.topics.command, "err", err)
		})
	if p.cfg.Username != "" {
		opts.SetUsername(p.cfg.Username).SetPassword(p.password)
	}
	if p.tls != nil {
		opts.SetTLSConfig(p.tls)
	}
	s.client = mqtt.NewClient(opts)
	p.setStatus(func(st *Status) { st.Broker = redactURL(broker) })

	tok := s.client.Connect()
	select {
	case <-tok.Done():
	case <-ctx.Done():
		go func() { // the attempt goes on inside paho; close it if it succeeds
			<-tok.Done()
			if tok.Error() == nil {
				s.client.Disconnect(0)
			}
		}()
		return false, nil
	}
	if err := tok.Error(); err != nil {
		return false, connectError(broker, err)
	}
	defer close(s.done)
	now := time.Now()
	p.setStatus(func(st *Status) { st.Connected, st.Since, st.Attempts = true, now, 0 })
	p.log.Info("MQTT connected", "broker", redactURL(broker), "client_id", p.cfg.ClientID)
	if err := p.startSession(); err != nil {
		s.client.Disconnect(0)
		return true, err
	}
	p.publishStatus(s)

	poll := time.NewTicker(time.Second)
	defer poll.Stop()
	statusTick := time.NewTicker(time.Duration(p.cfg.StatusInterval))
	defer statusTick.Stop()
	wake := time.NewTimer(time.Hour)
	defer wake.Stop()
	for {
		if err := p.pump(s, wake); err != nil {
			s.client.Disconnect(0)
			return true, err
		}
		select {
		case <-ctx.Done():
			p.shutdown(s)
			return true, nil
		case err := <-s.lost:
			p.setStatus(func(st *Status) { st.Connected, st.Since = false, time.Now() })
			return true, fmt.Errorf("connection to broker %s lost: %w", redactURL(broker), err)
		case <-p.notify:
		case <-poll.C:
		case <-wake.C:
		case r := <-s.results:
			if err := p.complete(s, r); err != nil {
				s.client.Disconnect(0)
				p.setStatus(func(st *Status) { st.Connected, st.Since = false, time.Now() })
				return true, err
			}
		case b := <-p.cmdIn:
			p.command(s, b)
		case b := <-p.periods:
			s.client.Publish(p.topics.base+"/"+DeliveryLive+"/period", 1, false, b)
		case <-statusTick.C:
			p.publishStatus(s)
		}
	}
}

// startSession sets every lane for a new connection: what was committed before it is backlog.
func (p *Publisher) startSession() error {
	st, err := p.store.Stats()
	if err != nil {
		p.storeError(err)
		return fmt.Errorf("store: %w", err)
	}
	for _, l := range p.lanes {
		if ss, ok := st.Streams[p.cfg.Stream][l.kind]; ok {
			l.acked = max(l.acked, ss.Acked)
		}
		l.acked, l.done = l.done.advance(l.acked)
		l.boundary = st.Kinds[l.kind].LastSeq
		l.bpos, l.bbuf = l.acked, nil
		l.lpos, l.lbuf = max(l.boundary, l.acked), nil
		l.lwait = time.Time{}
	}
	return nil
}

// shutdown waits briefly for acknowledgements, publishes the "offline" status and disconnects.
func (p *Publisher) shutdown(s *session) {
	deadline := time.NewTimer(2 * time.Second)
	defer deadline.Stop()
wait:
	for s.inflight > 0 {
		select {
		case r := <-s.results:
			if p.complete(s, r) != nil {
				break wait
			}
		case <-s.lost:
			break wait
		case <-deadline.C:
			break wait
		}
	}
	tok := s.client.Publish(p.topics.status, 1, true, p.appendStatus(nil, "offline", true))
	tok.WaitTimeout(time.Second)
	s.client.Disconnect(250)
	p.setStatus(func(st *Status) { st.Connected, st.Since = false, time.Now() })
	p.log.Info("MQTT disconnected", "broker", redactURL(s.broker))
}

// batch returns the number of records per message for kind k.
func (p *Publisher) batch(k record.Kind) int {
	if k == record.KindSecond {
		return p.cfg.SecondsPerMessage
	}
	return 1
}

// absorb moves records with sequence numbers up to upto from recs into buf, skipping those
// already delivered and marking numbers with no stored record (removed by retention) as done.
// It returns the last sequence number examined.
func (l *lane) absorb(pos, upto uint64, recs []record.Record, buf []record.Record) (uint64, []record.Record, bool) {
	for _, r := range recs {
		s := r.Seq()
		if s > upto {
			return pos, buf, true
		}
		if s > pos+1 {
			l.done = l.done.add(pos+1, s-1)
		}
		pos = s
		if !l.done.contains(s) {
			buf = append(buf, r)
		}
	}
	return pos, buf, false
}

// advance moves the store's cursor over the delivered ranges that follow it.
func (p *Publisher) advance(l *lane) {
	acked, rest := l.done.advance(l.acked)
	l.done = rest
	if acked == l.acked {
		return
	}
	if err := p.store.Ack(p.cfg.Stream, l.kind, acked); err != nil {
		p.storeError(err)
		return
	}
	l.acked = acked
}

// storeError records a store error in the status and logs it at most once a minute.
func (p *Publisher) storeError(err error) {
	if ok, held := p.storeErrs.allow(time.Now()); ok {
		p.log.Error("store", "err", err, "errors_since_last_log", held)
	}
	p.setStatus(func(st *Status) { st.LastError, st.LastErrorAt = "store: "+err.Error(), time.Now() })
}

// fillLive reads live records of l into its buffer when it holds less than a message: held
// records too, so that they leave without waiting for the store's commit (Store.Recent).
func (p *Publisher) fillLive(l *lane) {
	if len(l.lbuf) >= p.batch(l.kind) || p.store.LastSeq(l.kind) <= l.lpos {
		return
	}
	recs, err := p.store.Recent(l.kind, l.lpos, fetchChunk)
	if err != nil {
		p.storeError(err)
		return
	}
	l.lpos, l.lbuf, _ = l.absorb(l.lpos, math.MaxUint64, recs, l.lbuf)
	p.advance(l)
}

// fillBacklog reads backlog records of l into its buffer when it holds less than a message.
func (p *Publisher) fillBacklog(l *lane) {
	if len(l.bbuf) >= p.batch(l.kind) || l.bpos >= l.boundary {
		return
	}
	recs, err := p.store.After(l.kind, l.bpos, fetchChunk)
	if err != nil {
		p.storeError(err)
		return
	}
	var past bool
	l.bpos, l.bbuf, past = l.absorb(l.bpos, l.boundary, recs, l.bbuf)
	if (past || len(recs) < fetchChunk) && l.bpos < l.boundary {
		// Nothing stored between here and the boundary: removed by retention.
		l.done = l.done.add(l.bpos+1, l.boundary)
		l.bpos = l.boundary
	}
	p.advance(l)
}

// take removes up to n records from buf.
func take(buf []record.Record, n int) ([]record.Record, []record.Record) {
	n = min(n, len(buf))
	out := buf[:n:n]
	return out, buf[n:]
}

// takeBatch removes the records of the next message from buf (in sequence order). Batches of
// n > 1 records are aligned to sequence numbers: a message holds the records with sequence
// numbers in (k·n − n, k·n], so consumers see the same grouping whatever the outages were.
// complete reports whether the batch reaches its last sequence number k·n.
func takeBatch(buf []record.Record, n int) (recs, rest []record.Record, complete bool) {
	if n <= 1 {
		recs, rest = take(buf, 1)
		return recs, rest, true
	}
	last := ((buf[0].Seq()-1)/uint64(n) + 1) * uint64(n)
	i := 0
	for i < len(buf) && buf[i].Seq() <= last {
		i++
	}
	return buf[:i:i], buf[i:], buf[i-1].Seq() == last || i < len(buf)
}

// encode builds the payload for recs (one kind, sequence order).
func (p *Publisher) encode(e envelope, recs []record.Record) []byte {
	if recs[0].Kind() == record.KindSecond {
		secs := make([]*record.Second, len(recs))
		for i, r := range recs {
			secs[i] = r.(*record.Second)
		}
		return appendSeconds(nil, e, secs, p.cfg.Spectra == SpectraSecond, p.quantities)
	}
	return appendRecord(nil, e, recs[0], p.cfg.Spectra != SpectraNone)
}

func (p *Publisher) envelope(delivery string) envelope {
	return envelope{node: p.id.NodeID, store: p.store.ID(), delivery: delivery}
}

// pump publishes what it may: live records first, then backlog and resend messages, oldest
// first, within the rate limits and the in-flight window. It arms wake for the next time it has
// work held back by a limit or a partial batch.
func (p *Publisher) pump(s *session, wake *time.Timer) error {
	now := time.Now()
	var next time.Duration
	later := func(d time.Duration) {
		if d > 0 && (next == 0 || d < next) {
			next = d
		}
	}
	for _, l := range p.lanes {
		for !l.off && s.inflight < p.cfg.MaxInFlight {
			p.fillLive(l)
			if len(l.lbuf) == 0 {
				break
			}
			n := p.batch(l.kind)
			recs, rest, complete := takeBatch(l.lbuf, n)
			if !complete {
				// Hold a partial batch of live seconds until it fills or has waited LiveWait.
				if l.lwait.IsZero() {
					l.lwait = now
				}
				if hold := time.Duration(p.cfg.LiveWait) - now.Sub(l.lwait); hold > 0 {
					later(hold)
					break
				}
			}
			l.lbuf = rest
			l.lwait = time.Time{}
			p.send(s, message{kind: l.kind, lo: recs[0].Seq(), hi: recs[len(recs)-1].Seq()}, DeliveryLive, p.encode(p.envelope(DeliveryLive), recs))
		}
	}
	backlog := false
	for s.inflight < p.cfg.MaxInFlight {
		var oldest *lane
		for _, l := range p.lanes {
			if l.off {
				continue
			}
			p.fillBacklog(l)
			if len(l.bbuf) > 0 && (oldest == nil || l.bbuf[0].Time().Before(oldest.bbuf[0].Time())) {
				oldest = l
			}
		}
		if oldest == nil && len(p.jobs) == 0 {
			break
		}
		if ok, d := p.msgBucket.ready(now, 1); !ok {
			later(d)
			break
		}
		if ok, d := p.byteBucket.ready(now, 1); !ok {
			later(d)
			break
		}
		var payload []byte
		var m message
		delivery := DeliveryBacklog
		if oldest != nil {
			var recs []record.Record
			recs, oldest.bbuf, _ = takeBatch(oldest.bbuf, p.batch(oldest.kind))
			m = message{kind: oldest.kind, lo: recs[0].Seq(), hi: recs[len(recs)-1].Seq()}
			payload = p.encode(p.envelope(DeliveryBacklog), recs)
		} else if m, payload = p.nextResend(s); payload == nil {
			break
		} else {
			delivery = DeliveryResend
		}
		p.msgBucket.take(now, 1)
		p.byteBucket.take(now, float64(len(payload)))
		p.send(s, m, delivery, payload)
	}
	for _, l := range p.lanes {
		if !l.off && (l.bpos < l.boundary || len(l.bbuf) > 0) {
			backlog = true
		}
	}
	p.setStatus(func(st *Status) { st.Backlog, st.InFlight = backlog, s.inflight })
	if next > 0 {
		wake.Reset(next)
	}
	return nil
}

// send publishes one data message with QoS 1 and reports its completion on s.results.
func (p *Publisher) send(s *session, m message, delivery string, payload []byte) {
	m.bytes = len(payload)
	tok := s.client.Publish(p.topics.data(delivery, m.kind), 1, false, payload)
	s.inflight++
	if m.job != nil {
		m.job.inflight++
	}
	go func() {
		select {
		case <-tok.Done():
		case <-s.done:
			return
		}
		select {
		case s.results <- result{m, tok.Error()}:
		case <-s.done:
		}
	}()
}

// complete handles the broker's acknowledgement (or the failure) of one message.
func (p *Publisher) complete(s *session, r result) error {
	s.inflight--
	if j := r.m.job; j != nil {
		j.inflight--
		if r.err != nil {
			j.failed++
		}
		p.finishJobs(s)
	}
	if r.err != nil {
		return fmt.Errorf("publishing to broker %s failed: %w", redactURL(s.broker), r.err)
	}
	if r.m.job == nil {
		l := p.lanes[int(r.m.kind)-1]
		l.done = l.done.add(r.m.lo, r.m.hi)
		p.advance(l)
	}
	now := time.Now()
	p.setStatus(func(st *Status) {
		st.Messages++
		st.Bytes += uint64(r.m.bytes)
		st.LastPublish = now
		st.InFlight = s.inflight
	})
	return nil
}

// appendStatus appends the status message: state "online" or "offline". The last will is
// built once before connecting and carries no time.
func (p *Publisher) appendStatus(b []byte, state string, stamped bool) []byte {
	var st Status
	lastSeq := map[string]uint64{}
	if state == "online" {
		st = p.Status()
		for _, k := range record.Kinds() {
			lastSeq[k.String()] = p.store.LastCommitted(k) // what the broker can have: pending counts committed records too
		}
	}
	return p.appendStatusFields(b, state, stamped, st, p.store.ID(), lastSeq)
}

func (p *Publisher) appendStatusFields(b []byte, state string, stamped bool, st Status, storeID string, lastSeq map[string]uint64) []byte {
	w := jw{b}
	w.open()
	w.key("schema_version")
	w.int(SchemaVersion)
	w.key("kind")
	w.str("status")
	w.key("node")
	w.str(p.id.NodeID)
	w.key("store")
	w.str(storeID)
	w.key("state")
	w.str(state)
	if stamped {
		w.times("time", time.Now())
	}
	if p.id.Site != "" {
		w.key("site")
		w.str(p.id.Site)
	}
	if p.id.Location != nil {
		w.key("location")
		w.open()
		w.key("latitude")
		w.num(p.id.Location.Latitude, 6)
		w.key("longitude")
		w.num(p.id.Location.Longitude, 6)
		w.close()
	}
	if p.id.SoftwareVersion != "" {
		w.key("software_version")
		w.str(p.id.SoftwareVersion)
	}
	w.key("spectra")
	w.str(p.cfg.Spectra)
	w.key("seconds_per_message")
	w.int(int64(p.cfg.SecondsPerMessage))
	w.key("commands")
	w.bool(p.cfg.Commands.Enabled)
	if state == "online" {
		w.key("backlog")
		w.bool(st.Backlog)
		w.key("pending")
		w.open()
		for _, k := range record.Kinds() {
			w.key(k.String())
			w.uint(st.Pending[k.String()])
		}
		w.close()
		w.key("last_seq")
		w.open()
		for _, k := range record.Kinds() {
			w.key(k.String())
			w.uint(lastSeq[k.String()])
		}
		w.close()
	}
	w.close()
	return w.b
}

// publishStatus publishes the retained "online" status (QoS 1, not waited for).
func (p *Publisher) publishStatus(s *session) {
	s.client.Publish(p.topics.status, 1, true, p.appendStatus(nil, "online", true))
}
