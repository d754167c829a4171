// Package web serves a node's field status page, its read-only JSON endpoints and its
// Prometheus metrics over HTTP.
//
// The model is a window onto a running node that can never change it. Everything the server
// shows comes from three places: the store (the last hour of second records, the latest
// spectrum, calibration checks, health snapshots, gaps), a Live function polled for the
// current A-weighted Fast level, and a Status function that returns what only the running
// node knows (identity, counters, MQTT backlog, calibration state, the last self-verification).
// Every endpoint answers GET and HEAD only; any other method gets 405 Method Not Allowed, and
// no endpoint takes a setting.
//
// Endpoints:
//
//	/                      the status page (HTML, script and style embedded, nothing external)
//	/api/status            Status, completed with what the store knows (JSON)
//	/api/seconds?minutes=N LAeq, LAFmax, LAFmin and flags of each second of the last N minutes
//	/api/spectrum          the latest one-third-octave LZeq spectrum (second, else minute)
//	/api/calibrations      the calibration state and the stored checks, newest first
//	/api/health            clipping, dropped samples, clock, storage, MQTT backlog, gaps
//	/api/live              server-sent events: the Fast level several times a second, and
//	                       each new second record as it is stored
//	/metrics               Prometheus text format, from a registry private to the Server
//
// Reads from the store copy records out of short read transactions (Store.Range, Store.Last)
// before anything is written to a client: a slow phone on a poor link never holds a bbolt
// transaction open, so it never blocks the writer's file growth.
//
// # Access
//
// The server binds to 127.0.0.1 unless told otherwise. An optional access token is accepted as
// "Authorization: Bearer TOKEN" or once as "?token=TOKEN", which sets a cookie for the page's
// own requests. Plain HTTP carries the token in clear text: beyond the local link, reach the
// page through an SSH tunnel or a TLS proxy.
package web
