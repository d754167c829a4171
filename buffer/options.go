package buffer

import (
	"log/slog"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// Defaults. The commit interval and freelist choice come from the write-volume measurements of
// BenchmarkWriteVolume and BenchmarkOpen (see the package documentation).
const (
	// DefaultCommitInterval is the group-commit period: at most this much is lost in a crash.
	// It is the shortest of the intervals measured that keeps a node with spectra under 5 MB
	// written per hour on a store holding 30 days (3.7 MB/h by bbolt's count, 4.4 MB/h at the
	// block layer of an ext4 disk; 30 s gives 5.4 and 6.9).
	DefaultCommitInterval = 60 * time.Second
	// DefaultMaxHeld is the number of records held in memory that forces a commit.
	DefaultMaxHeld = 4096
	// DefaultLockTimeout is how long Open and OpenReadOnly wait for another process's lock.
	DefaultLockTimeout = time.Second
	// DefaultMaxBytes is the total size cap: 1 GiB where pointers have 64 bits, 512 MiB on
	// 32-bit builds, where bbolt must map the whole file into a 4 GiB address space.
	DefaultMaxBytes int64 = 512 << 20 << (^uint(0) >> 63)

	day  = 24 * time.Hour
	year = 365*day + 6*time.Hour
)

// DefaultRetention returns the default retention per kind: seconds 30 days, health 90 days,
// everything else 5 years.
func DefaultRetention() map[record.Kind]time.Duration {
	return map[record.Kind]time.Duration{
		record.KindSecond:      30 * day,
		record.KindHealth:      90 * day,
		record.KindMinute:      5 * year,
		record.KindEvent:       5 * year,
		record.KindCalibration: 5 * year,
		record.KindAnnotation:  5 * year,
		record.KindSession:     5 * year,
		record.KindGap:         5 * year,
	}
}

// Options tune a Store. A nil *Options, and every zero field, means the default.
type Options struct {
	// CommitInterval is the group-commit period (default DefaultCommitInterval). Records
	// appended within one interval are committed in one transaction.
	//
	// Trade-off: every commit rewrites the tail pages of several B+trees plus a meta page and
	// costs two fsyncs, so the bytes written to flash per hour fall almost in proportion to the
	// interval. Danger: a crash or power cut loses up to one interval of results, and consumers
	// (Pending) see records only once they are committed, so a long interval also delays
	// publication.
	CommitInterval time.Duration

	// MaxHeld forces a commit when this many records are held in memory (default
	// DefaultMaxHeld). It bounds memory when records arrive in bursts.
	MaxHeld int

	// Retention sets how long records of each kind are kept, measured from their Time against
	// Now. Kinds not in the map, or mapped to zero, keep their DefaultRetention; a negative
	// duration keeps the kind until the size cap removes it.
	//
	// Danger: age retention trusts the wall clock. A clock that jumps years ahead deletes the
	// records it then believes too old; a node should not start writing before its clock is
	// plausible.
	Retention map[record.Kind]time.Duration

	// MaxBytes caps the space the records use (default DefaultMaxBytes). When the used space
	// passes 90 % of the cap, the oldest records of the kinds with the shortest retention are
	// deleted until it falls to 85 %; the file itself stays within a few percent of the cap.
	//
	// Danger: a cap larger than the free space on the card lets the file fill the card, and on
	// 32-bit builds a cap near 1 GiB can fail to map.
	MaxBytes int64

	// LockTimeout is how long Open waits for another process to release the file (default
	// DefaultLockTimeout). Zero means the default, never "wait forever".
	LockTimeout time.Duration

	// NoFreelistSync stops bbolt from writing its list of free pages at every commit.
	//
	// Trade-off: each commit then writes about 7 % fewer bytes (3.45 instead of 3.70 MB per
	// hour on a store holding 30 days, BenchmarkWriteVolume), but every Open must rebuild the
	// list by walking the whole file: 0.65 s instead of 0.03 s for a 380 MB store in the page
	// cache (BenchmarkOpen), tens of seconds from a cold SD card. Danger: that walk runs in a
	// goroutine of bbolt's own, where a damaged page crashes the process at every start instead
	// of being reported.
	NoFreelistSync bool

	// CheckOnOpen runs a full consistency check when the store is opened for writing; a store
	// that fails is moved aside like a file bbolt cannot open.
	//
	// Trade-off: it reads the whole file (seconds to minutes for a large store on a slow card);
	// without it, damage in pages that are never read goes unnoticed until Check is run.
	CheckOnOpen bool

	// NoSync skips fsync on commit.
	//
	// Danger: a power cut can then leave a corrupt file and lose everything since the last
	// open. For tests and benchmarks only.
	NoSync bool

	// Now is the clock for retention and commit timing (default time.Now). Tests inject one.
	Now func() time.Time

	// Logger receives the store's rare log lines: recovery from a damaged file, commit failures
	// (default slog.Default()).
	Logger *slog.Logger
}

func (o *Options) resolved() Options {
	var r Options
	if o != nil {
		r = *o
	}
	if r.CommitInterval <= 0 {
		r.CommitInterval = DefaultCommitInterval
	}
	if r.MaxHeld <= 0 {
		r.MaxHeld = DefaultMaxHeld
	}
	ret := DefaultRetention()
	for k, d := range r.Retention {
		if d != 0 {
			ret[k] = d
		}
	}
	r.Retention = ret
	if r.MaxBytes <= 0 {
		r.MaxBytes = DefaultMaxBytes
	}
	if r.LockTimeout <= 0 {
		r.LockTimeout = DefaultLockTimeout
	}
	if r.Now == nil {
		r.Now = time.Now
	}
	if r.Logger == nil {
		r.Logger = slog.Default()
	}
	return r
}
