package capture

// DeviceInfo describes a capture device as PortAudio sees it, for choosing Config.Device.
type DeviceInfo struct {
	Index         int    // PortAudio's index, valid until PortAudio is initialised again
	Name          string // the name to give (or a substring of it) as Config.Device
	HostAPI       string // "ALSA", "JACK Audio Connection Kit", ...
	InputChannels int    // the most channels it opens for capture
	// DefaultRate is the rate PortAudio opens when Config.SampleRate is 0: the native rate of
	// a hardware device.
	DefaultRate int
	// Rates lists the standard rates (8000 to 192000 Hz) the device accepts for capture of
	// one channel of float32. On a conversion layer (see Converts) most of them are resampled.
	Rates []int
	// Default marks the host API's default input device.
	Default bool
	// Converts marks an ALSA device that is a conversion layer ("default", "sysdefault",
	// "plughw", "dsnoop", "pulse" ...) rather than hardware ("... (hw:1,0)"): it may resample,
	// convert formats and mix behind the node's back. Prefer a hardware device for measuring.
	Converts bool
}
