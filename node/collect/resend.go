package collect

import (
	"errors"
	"fmt"
	"time"

	"github.com/leqnode/leqnode/node/fleetdb"
)

// resendCommand writes a resend command as a node reads it on PREFIX/NODE/command
// (configs/schema/command.schema.json).
func resendCommand(r fleetdb.ResendRequest) []byte {
	return fmt.Appendf(nil, `{"schema_version":1,"id":%q,"action":"resend","from":%q,"to":%q,"kinds":[%q]}`,
		r.ID, r.From.UTC().Format("2006-01-02T15:04:05.000Z07:00"), r.To.UTC().Format("2006-01-02T15:04:05.000Z07:00"), r.Kind)
}

// sendResend publishes a resend command at QoS 1 and waits for the broker to take it.
func (c *Collector) sendResend(r fleetdb.ResendRequest) error {
	topic := c.cfg.Broker.TopicPrefix + "/" + r.Node + "/command"
	tok := c.client.Publish(topic, 1, false, resendCommand(r))
	if !tok.WaitTimeout(10 * time.Second) {
		return errors.New("the broker did not take the command within 10 s")
	}
	if err := tok.Error(); err != nil {
		return err
	}
	c.m.resends.Inc()
	c.log.Info("asked a node to resend a hole", "node", r.Node, "kind", r.Kind, "first_seq", r.First, "last_seq", r.Last,
		"from", r.From, "to", r.To, "attempt", r.Attempt, "id", r.ID)
	return nil
}
