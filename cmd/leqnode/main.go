// Command leqnode runs an unattended noise monitoring node and the tools around it.
//
// Usage:
//
//	leqnode <command> [flags] [args]
//
// Run `leqnode help` for the list of commands. Every command follows one set of conventions:
// a recording is a positional FILE (`-` is standard input); the store comes from --config FILE
// or --db FILE; time ranges are --from and --to (RFC 3339 or YYYY-MM-DD, half-open); --format
// takes table, csv, jsonl, json or html where they make sense. Errors are one line on standard
// error naming the thing and the fix; the exit status is 2 for bad input or usage and 1 for a
// failure at run time.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"strings"
	"syscall"

	"github.com/leqnode/leqnode/node/lib/query"
)

// stdio is what a command reads and writes; tests swap it.
type stdio struct {
	in       io.Reader
	out      io.Writer
	err      io.Writer
	outIsTTY bool
	errIsTTY bool
}

// command is one subcommand: a thin function over the packages.
type command struct {
	summary string
	run     func(ctx context.Context, io stdio, args []string) error
}

// commands lists the subcommands by name. Each file of this package adds its own in an init-free
// way through this one table, so the list in `leqnode help` is always complete.
func commands() map[string]command {
	return map[string]command{
		"analyze":   {"measure a WAV recording with the node's own chain", runAnalyze},
		"export":    {"write stored records of one kind as CSV or JSON lines", runExport},
		"db":        {"check a store file and summarise what it holds", runDB},
		"report":    {"write an HTML report and CSV files of regulatory indicators for a range", runReport},
		"calibrate": {"find a sound calibrator's tone and derive the microphone sensitivity", runCalibrate},
		"verify":    {"run the electrical self-tests of the measurement chain", runVerify},
		"run":       {"run the node: capture, measure, store (and publish)", runRun},
		"demo":      {"run the node on the synthetic street scene, no microphone needed", runDemo},
		"config":    {"check a configuration file: config check FILE", runConfig},
		"devices":   {"list capture devices and the sample rates they take", runDevices},
		"version":   {"print the release, commit, Go version and platform (also --version)", runVersion},
		"collect":   {"run the central collector: MQTT from the fleet into PostgreSQL", runCollect},
		"fleet":     {"fleet status: one line per node from the central database", runFleet},
	}
}

// usageError marks bad input or usage: the process exits with status 2.
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

// badInput returns a usage error (exit status 2) with a formatted one-line message.
func badInput(format string, a ...any) error {
	return usageError{fmt.Errorf(format, a...)}
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, stdio{
		in: os.Stdin, out: os.Stdout, err: os.Stderr,
		outIsTTY: isTerminal(os.Stdout), errIsTTY: isTerminal(os.Stderr),
	}, os.Args[1:])
	stop()
	os.Exit(code)
}

// run dispatches to a subcommand and maps its error to an exit status.
func run(ctx context.Context, io stdio, args []string) int {
	cmds := commands()
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		err := printHelp(io.out, cmds)
		switch {
		case len(args) == 0:
			return 2
		case err != nil:
			say(io.err, "leqnode help: %v\n", err)
			return 1
		}
		return 0
	}
	if args[0] == "--version" || args[0] == "-version" {
		args = append([]string{"version"}, args[1:]...)
	}
	c, ok := cmds[args[0]]
	if !ok {
		say(io.err, "leqnode: unknown command %q: run 'leqnode help' for the list\n", args[0])
		return 2
	}
	err := c.run(ctx, io, args[1:])
	switch {
	case err == nil:
		return 0
	case errors.Is(err, errHelpShown):
		return 0
	default:
		say(io.err, "leqnode %s: %v\n", args[0], err)
		// Bad input: a usage error here, or a reading request refused as given (whether the
		// store was read here or by the daemon through its control socket).
		var u usageError
		if errors.As(err, &u) || errors.Is(err, query.ErrBadRequest) {
			return 2
		}
		return 1
	}
}

// errHelpShown reports that a command printed its help on request (-h); the exit status is 0.
var errHelpShown = errors.New("help shown")

func printHelp(w io.Writer, cmds map[string]command) error {
	names := make([]string, 0, len(cmds))
	for n := range cmds {
		names = append(names, n)
	}
	sort.Strings(names)
	var b strings.Builder
	b.WriteString("usage: leqnode <command> [flags] [args]\n\ncommands:\n")
	for _, n := range names {
		fmt.Fprintf(&b, "  %-10s %s\n", n, cmds[n].summary)
	}
	b.WriteString("\nRun 'leqnode <command> -h' for a command's flags.\n")
	_, err := io.WriteString(w, b.String())
	return err
}

// isTerminal reports whether f is a character device (a terminal).
func isTerminal(f *os.File) bool {
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}
