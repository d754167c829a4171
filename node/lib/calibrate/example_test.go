package calibrate_test

import (
	"errors"
	"fmt"

	"github.com/leqnode/leqnode/node/lib/calibrate"
)

// A 114 dB calibrator on a microphone whose data sheet says -26 dBFS reads -5.6 dBFS: the
// microphone is 0.4 dB more sensitive than nominal, well within the adjustment range.
func ExampleAdjust() {
	s := calibrate.Sensitivity(-5.6, 114)
	applied, err := calibrate.Adjust(-26, s, calibrate.DefaultAdjustRange)
	fmt.Printf("implied %.1f dBFS, applied %.1f dBFS, err %v\n", s, applied, err)

	// A wet microphone reads 7 dB low: refused.
	_, err = calibrate.Adjust(-26, calibrate.Sensitivity(-33, 94), 0)
	fmt.Println(errors.Is(err, calibrate.ErrMicrophoneFault))
	// Output:
	// implied -25.6 dBFS, applied -25.6 dBFS, err <nil>
	// true
}

// The before/after rule: more than 0.5 dB between two checks flags the data between them.
func ExampleDrifted() {
	fmt.Println(calibrate.Drifted(94.0, 94.6), calibrate.Drifted(94.0, 93.6), calibrate.Drifted(94.0, 94.5))
	// Output: true false false
}
