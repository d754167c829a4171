//go:build cgo && !noportaudio && !linux

package capture

// quietStderr runs f. Outside Linux the C libraries' start-up messages are left alone.
func quietStderr(f func()) { f() }
