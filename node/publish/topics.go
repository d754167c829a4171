package publish

import "github.com/leqnode/leqnode/buffer/record"

// topics is the node's topic tree:
//
//	PREFIX/NODE/status               retained status; last will "offline"
//	PREFIX/NODE/DELIVERY/KIND        data: DELIVERY is live, backlog or resend; KIND a record kind
//	PREFIX/NODE/command              remote commands to the node (subscribed only when enabled)
//	PREFIX/NODE/reply                the node's replies to commands
type topics struct {
	base    string
	status  string
	command string
	reply   string
}

func newTopics(prefix, node string) topics {
	base := prefix + "/" + node
	return topics{base: base, status: base + "/status", command: base + "/command", reply: base + "/reply"}
}

// data returns the topic for records of kind k sent as delivery.
func (t topics) data(delivery string, k record.Kind) string {
	return t.base + "/" + delivery + "/" + k.String()
}
