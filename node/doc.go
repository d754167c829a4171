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
// The processing goroutine keeps the clock anchoring, the cutting of seconds and their flags;
// the measurements beside the meter (noise events, the calibrator watch, the health checks) are
// side-chains with their own state that it drives through one small interface. It does no file
// I/O but the store's appends, which the store commits in groups: the sensitivity state file
// that an applied calibration writes goes to a state writer goroutine, and the machine's
// readings (memory, free space, temperature, clock state) come from a system watcher goroutine.
// Every store error is handled: a store that cannot write (a full disk) raises the store-fault
// flag while the node measures on, and any other store error stops the node and comes back
// from Run.
//
// The services around it are sub-packages: daemon (the composition root that starts and stops
// them all), capture (audio sources), publish (MQTT), control (the Unix socket), web (the status
// page and metrics), collect and fleetdb (the central collector), demobroker (the demo's MQTT
// broker). The libraries they and the commands build on, usable without a running node, are
// under node/lib: wav, scene, analyze, report, calibrate, config, strict, query, export and
// termprogress.
package node
