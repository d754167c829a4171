package main

import (
	"errors"
	"flag"
	"io"
	"os"
	"strings"
)

// newFlags returns a flag set for a subcommand whose errors and help go to w.
func newFlags(name, usage string, w io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(w)
	fs.Usage = func() {
		say(w, "usage: leqnode %s %s\n", name, usage)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses flags and positional arguments in any order ("FILE --format csv" and
// "--format csv FILE" alike); "--" ends the flags. A flag error is a usage error.
func parseFlags(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, errHelpShown
			}
			return nil, usageError{err}
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if len(args) > 0 && len(rest) < len(args) && args[len(args)-len(rest)-1] == "--" {
			return append(pos, rest...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

// oneOf checks that v is one of the allowed values of flag name.
func oneOf(name, v string, allowed ...string) error {
	for _, a := range allowed {
		if v == a {
			return nil
		}
	}
	return badInput("--%s %q is not allowed: use one of %s", name, v, strings.Join(allowed, ", "))
}

// openRecording opens the recording a command names: a file, or "-" for standard input. It
// returns the reader, the name to use in messages, and a function that closes the file.
func openRecording(std stdio, name string) (r io.Reader, display string, done func(), err error) {
	if name == "-" {
		return std.in, "standard input", func() {}, nil
	}
	f, err := os.Open(name)
	if err != nil {
		return nil, name, nil, badInput("%s: cannot open: %v", name, unwrapPath(err))
	}
	// Read-only: once the recording is read, closing it can lose nothing.
	return f, name, func() { _ = f.Close() }, nil
}

// unwrapPath drops the *PathError prefix (the file name is already in the message).
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}
