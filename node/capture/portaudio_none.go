//go:build !cgo || noportaudio

package capture

import (
	"errors"
	"log/slog"
)

// havePortAudio reports whether this build has the portaudio source.
const havePortAudio = false

// errNoPortAudio is the error of kind portaudio and of Devices in a build without PortAudio.
var errNoPortAudio = errors.New(section + ".kind = \"portaudio\": this build has no PortAudio; use kind arecord (or rebuild with cgo and Debian's portaudio19-dev)")

func newPortAudio(Config, *slog.Logger) (Source, error) { return nil, errNoPortAudio }

// Devices lists the capture devices PortAudio finds. This build has no PortAudio, so it
// returns an error that says so.
func Devices() ([]DeviceInfo, error) { return nil, errNoPortAudio }
