// Package buffer is the node's memory: a crash-safe ring buffer of measurement results in one
// bbolt file.
//
// # Model
//
// A store holds records of the kinds that package record defines (record.Kind): one-second
// results, one-minute statistics, events, calibration checks, health snapshots, gaps, annotations
// and session records. The package knows nothing of audio nor of what a record means: it keeps
// each record's versioned binary encoding (record.Record.AppendBinary, record.Decode) under its
// kind, sequence number and time.
//
// Every store has a random identity made at creation (Store.ID). Inside a store each kind has its
// own strictly increasing sequence number, assigned by Append; a committed sequence number is
// never used again in that store. Consumers order and de-duplicate by (store id, kind, sequence
// number), never by time: wall clocks step backwards, and some records (events) are written after
// records with later start times.
//
// Two orders serve two kinds of reader:
//
//   - by sequence number: the outbox. Each consumer stream (an MQTT publisher, an uploader) has
//     a persisted cursor per kind. Pending returns the committed records after the cursor, in
//     sequence order; Ack moves the cursor. A late record therefore cannot be skipped, and a
//     restart resumes where the consumer stopped acknowledging.
//   - by time: Range returns the records whose time (Record.Time) lies in a half-open interval
//     [from, to), in time order, through a run index (see runs.go: one entry per stretch of
//     records whose times rise, not one per record). It stays correct when the clock steps
//     backwards or records arrive late. Annotations are applied when reading: Range ORs the
//     flags of overlapping annotations into second, minute and event records; the stored
//     records are never rewritten.
//
// # Durability and write volume
//
// Append keeps records in memory and commits them in one bbolt transaction every
// Options.CommitInterval (group commit); the first record after Open is committed at once, and
// Flush and Close commit what is held. A crash or power cut loses at most the records of one
// commit interval. Committed records survive: bbolt writes the data pages, fsyncs, then writes
// and fsyncs the meta page, so on storage that honours flushes the file is always a consistent
// committed state. (A test that kills a writer with SIGKILL shows that the process can die at
// any instant without damage; it cannot show what a power cut does to a card that ignores
// flushes.)
//
// Each commit rewrites the tails of a few B+trees, so the bytes written to flash depend mostly on
// the number of commits, not on the number of records. Measured with BenchmarkWriteVolume on a
// store already holding 30 days (a second record with 33 one-third-octave bands every second, a
// minute and a health record every minute, a publisher acknowledging every 10 s; bbolt's count
// of pages written, and the block layer's count on ext4):
//
//	commit interval   freelist synced        freelist not synced
//	10 s              12.3 MB/h (16.7 disk)  10.8 MB/h (15.3 disk)
//	30 s               5.4 MB/h  (6.9 disk)   4.9 MB/h  (6.4 disk)
//	60 s               3.7 MB/h  (4.4 disk)   3.4 MB/h  (4.2 disk)
//
// The defaults, a 60 s interval with the freelist synced, keep under the project's goal of
// 5 MB per hour with a worst-case loss of 60 s. Measure again on the target card before
// shortening the interval.
//
// Other figures from the same machine (2 shared cores, ext4): a day of node output takes
// 12.8 MB of the file with spectra and 6.6 MB without (BenchmarkFileBytesPerDay); 30 days make a
// 379 MB file that opens in 0.02 s with the freelist synced and 0.7 to 1.1 s without
// (BenchmarkOpen); reading those 30 days of second records through Range takes 3 µs a record
// (BenchmarkRange); an Append costs 1.29 times as much on a store of 10 million records as on one
// of a thousand, and writes 1093 instead of 938 bytes, one more B+tree level (BenchmarkAppend).
// With the 1 GiB default cap, 30 days of seconds (about 390 MB) and the minute records (about
// 0.45 MB a day) fit for about three years; after that the cap trims the oldest seconds first.
//
// # Retention
//
// Inside the same transaction that adds new records, the store deletes records older than their
// kind's retention (Options.Retention) and, when the file's used space passes its size cap
// (Options.MaxBytes), the oldest records of the kinds with the shortest retention first.
// Deleting a record a consumer stream has not acknowledged is never silent: it is counted as
// dropped for that stream (Stats).
//
// # Damage and locking
//
// A file that bbolt cannot open is renamed aside with a time stamp (never deleted), a fresh
// store with a new identity takes its place, and Store.Recovered reports the moved file so the
// node can raise a health flag. bbolt holds an exclusive lock on the file while the daemon
// writes; OpenReadOnly waits at most a second for it and then says the daemon holds the store.
//
// A Store is safe for use by several goroutines. It starts no goroutines of its own: commits
// happen inside Append when due, and in Flush and Close.
package buffer
