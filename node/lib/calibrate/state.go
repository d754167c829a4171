package calibrate

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// StateFile is the name of the sensitivity state file in the node's state directory.
const StateFile = "sensitivity.json"

// State is the applied microphone sensitivity and the check that set it, as kept in the state
// directory. It outlives restarts and configuration reloads: the node measures with
// SensitivityDBFS rather than the configured nominal once a check has set it.
type State struct {
	// SensitivityDBFS is the sensitivity in use, dBFS for 94 dB at 1 kHz.
	SensitivityDBFS float64 `json:"sensitivity_dBFS"`
	// NominalDBFS is the microphone's nominal (data-sheet) sensitivity the adjustment range
	// was judged against.
	NominalDBFS float64 `json:"nominal_dBFS"`
	// At is when the check that set it ended.
	At time.Time `json:"at"`
	// Reference is the calibrator's stated level, dB.
	Reference float64 `json:"reference_dB"`
	// FrequencyHz is the calibrator tone's frequency.
	FrequencyHz float64 `json:"frequency_hz"`
}

func (s *State) validate() error {
	ok := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case !ok(s.SensitivityDBFS) || s.SensitivityDBFS > 0 || s.SensitivityDBFS < -100:
		return fmt.Errorf("sensitivity_dBFS %v is outside -100 to 0", s.SensitivityDBFS)
	case !ok(s.NominalDBFS) || s.NominalDBFS > 0 || s.NominalDBFS < -100:
		return fmt.Errorf("nominal_dBFS %v is outside -100 to 0", s.NominalDBFS)
	case !ok(s.Reference) || !ok(s.FrequencyHz):
		return errors.New("reference_dB or frequency_hz is not a number")
	}
	return nil
}

// LoadState reads the state file in dir. It returns an error wrapping fs.ErrNotExist when no
// check has been applied yet, and a one-line error naming the file and the fix when the file
// is damaged (the caller then measures with the nominal sensitivity and says so).
func LoadState(dir string) (*State, error) {
	path := filepath.Join(dir, StateFile)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var s State
	if err := strict.JSON(b, &s); err != nil {
		return nil, fmt.Errorf("sensitivity state %s is damaged (%v): remove it and calibrate again", path, err)
	}
	if err := s.validate(); err != nil {
		return nil, fmt.Errorf("sensitivity state %s: %v: remove it and calibrate again", path, err)
	}
	return &s, nil
}

// SaveState writes s to the state file in dir atomically: it writes a temporary file in the
// same directory, syncs it, renames it over the state file and syncs the directory, so that
// after a power cut the file holds either the old state or the new one, never a mixture.
func SaveState(dir string, s State) error {
	if err := s.validate(); err != nil {
		return fmt.Errorf("sensitivity state not saved: %w", err)
	}
	b, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return err
	}
	b = append(b, '\n')
	tmp, err := os.CreateTemp(dir, StateFile+".tmp-*")
	if err != nil {
		return fmt.Errorf("sensitivity state: %w", err)
	}
	name := tmp.Name()
	fail := func(err error) error {
		// The write already failed: the temporary file is useless whatever Close and Remove
		// report, and err is the one that explains the failure.
		_ = tmp.Close()
		_ = os.Remove(name)
		return fmt.Errorf("sensitivity state: %w", err)
	}
	if _, err := tmp.Write(b); err != nil {
		return fail(err)
	}
	if err := tmp.Sync(); err != nil {
		return fail(err)
	}
	if err := tmp.Close(); err != nil {
		_ = os.Remove(name) // best effort: the Close error is the one to report
		return fmt.Errorf("sensitivity state: %w", err)
	}
	if err := os.Rename(name, filepath.Join(dir, StateFile)); err != nil {
		_ = os.Remove(name) // best effort: the Rename error is the one to report
		return fmt.Errorf("sensitivity state: %w", err)
	}
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("sensitivity state: syncing %s: %w", dir, err)
	}
	serr := d.Sync()
	if errors.Is(serr, fs.ErrInvalid) {
		serr = nil // a file system that cannot sync a directory
	}
	if err := errors.Join(serr, d.Close()); err != nil {
		return fmt.Errorf("sensitivity state: syncing %s: %w", dir, err)
	}
	return nil
}

// Prepare judges whether the sensitivity a check implies may be put into use, without saving
// anything: it refuses (an error wrapping ErrMicrophoneFault) when the sensitivity lies beyond
// rangeDB (default DefaultAdjustRange) of nominal or the check clipped, and otherwise returns
// the state to save. It does no I/O, so a caller that must not block (the node's processing
// goroutine) can judge at once and save elsewhere with SaveState.
func Prepare(c *record.Calibration, nominal, rangeDB float64) (State, error) {
	if c.Flags.Has(record.Clipped) {
		return State{}, fmt.Errorf("%w: the calibrator's tone clipped: use its 94 dB setting or lower the input gain", ErrMicrophoneFault)
	}
	s, err := Adjust(nominal, Implied(c), rangeDB)
	if err != nil {
		return State{}, err
	}
	return State{SensitivityDBFS: s, NominalDBFS: nominal, At: c.At, Reference: c.Reference, FrequencyHz: c.Frequency}, nil
}

// Apply puts the sensitivity a check implies into use: it refuses as Prepare does (nothing
// changed); otherwise it saves the state file in dir and marks the check Applied with its
// SensitivityAfter. Call it before RecordCheck so that the stored check says what was applied.
// The caller then measures with State.SensitivityDBFS and writes a new session record.
func Apply(dir string, c *record.Calibration, nominal, rangeDB float64) (*State, error) {
	st, err := Prepare(c, nominal, rangeDB)
	if err != nil {
		return nil, err
	}
	if err := SaveState(dir, st); err != nil {
		return nil, err
	}
	c.SensitivityAfter, c.Applied = st.SensitivityDBFS, true
	return &st, nil
}
