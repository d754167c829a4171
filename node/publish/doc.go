// Package publish delivers a node's stored records to an MQTT broker: store-and-forward with
// at-least-once delivery, whatever the network does.
//
// # Model
//
// The store (package buffer) is the only queue. For each record kind the store keeps a cursor
// for the publisher's stream (Config.Stream): the last sequence number the broker has
// acknowledged. The publisher reads records after the cursor, publishes them with QoS 1 and a
// bounded number of messages in flight (Config.MaxInFlight), and moves the cursor only when the
// broker's PUBACK arrives, over contiguous ranges. paho's own message store is never relied on:
// after a lost connection the publisher reconnects itself (capped exponential backoff with
// jitter) and publishes again from the cursor. A record is therefore delivered at least once; it
// is delivered twice when the connection (or the node) dies between the broker's receipt and the
// cursor's commit. Consumers de-duplicate by (store id, kind, sequence number), which every
// payload carries, and order by sequence number, never by arrival.
//
// On every connection, the records stored before it are backlog: they go out oldest first
// (across kinds, by record time), rate-limited (Config.BacklogMessagesPerSecond and
// BacklogBytesPerSecond), on their own topic and marked "delivery": "backlog". Records stored
// after it are live and go out as soon as the store has committed them (the node calls
// Publisher.Notify after each commit; the store's commit interval bounds the delay), beside the
// backlog. Second records travel in batches of
// Config.SecondsPerMessage, in columns (one array per quantity).
//
// # Topics
//
//	PREFIX/NODE/status             retained status, "online"; the last will sets "offline"
//	PREFIX/NODE/live/KIND          records as they are stored
//	PREFIX/NODE/backlog/KIND       records stored while the node could not publish
//	PREFIX/NODE/resend/KIND        records sent again on a resend command
//	PREFIX/NODE/command            remote commands (subscribed only when enabled)
//	PREFIX/NODE/reply              replies to commands
//
// KIND is second, minute, event, calibration, health, gap, annotation or session. The payloads
// are described by the JSON Schema files in configs/schema and by docs/mqtt.md at the top of the source tree.
//
// # Remote commands
//
// Off by default. When enabled, the node accepts three actions on an allow-list: a calibration
// check (handed to the node through Requests), publishing the status now, and resending a time
// range. A command is validated strictly (size cap, one JSON object with known fields only,
// schema version, id); anything else is ignored and logged at most once a minute.
//
// # Credentials
//
// The password comes from the configuration, a file or an environment variable. It is given
// to the MQTT client only: it never appears in a log line, an error, the status or a payload.
// Broker URLs with user information are refused by Config.Validate.
//
// Measurements from a node are indicative: legally valid measurements need a type-approved
// class 1 instrument with traceable calibration, and local regulations decide.
package publish
