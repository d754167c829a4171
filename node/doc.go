// Package node is the daemon: it wires a capture source, the measurement chain of package dsp,
// the store of package buffer and the publisher, and owns every goroutine and every piece of I/O
// of a running node.
//
// The model is a pipeline with one rule: capture never waits. A capture goroutine reads blocks
// from the source into a fixed pool of buffers and hands them over a bounded queue; when the
// processing side falls behind and no buffer is free, the samples are counted as dropped and the
// seconds they belong to are flagged, never silently lost. The processing goroutine times every
// sample with a SampleClock (the sample count anchored to the system clock, the converter's rate
// tracked continuously), closes a measurement interval at every UTC second boundary, writes
// second records and, at every UTC minute boundary, minute records with the level histogram, and
// notifies the publisher. Device loss, a stalled device (the watchdog), a clock step or a start
// after a crash each leave an explicit gap record, so that a report can tell silence from
// missing data.
//
// Sub-packages hold the parts: capture (audio sources), wav (WAV codec), scene (the synthetic
// demo scene), analyze (offline analysis with the same chain) and publish (MQTT).
package node
