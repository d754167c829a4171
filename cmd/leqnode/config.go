package main

import (
	"context"
	"fmt"

	"github.com/leqnode/leqnode/node/lib/config"
)

const configUsage = `usage: leqnode config check FILE

Checks a configuration file: every problem is listed on standard error, one line each
(file:line: key: what is wrong: what to do), and the exit status is 2. A valid file is
printed in full with every default filled in, as the daemon runs it; advice about risky
but allowed settings (a status page served to the network without a token) goes to
standard error as "warning:" lines and does not change the exit status 0.`

func runConfig(ctx context.Context, std stdio, args []string) error {
	if len(args) > 0 {
		switch args[0] {
		case "-h", "-help", "--help", "help":
			say(std.err, "%s\n", configUsage) // help goes where every command's -h goes
			return errHelpShown
		}
	}
	if len(args) == 0 || args[0] != "check" {
		return badInput("usage: leqnode config check FILE")
	}
	fl := newFlags("config check", "FILE", std.err)
	pos, err := parseFlags(fl, args[1:])
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return badInput("give one configuration FILE to check")
	}
	cfg, err := config.Load(pos[0])
	if err != nil {
		// One line per problem, each naming the key; exit status 2.
		say(std.err, "%v\n", err)
		return usageError{fmt.Errorf("%s: the configuration has problems (listed above)", pos[0])}
	}
	for _, w := range cfg.Warnings() {
		say(std.err, "warning: %s: %s\n", pos[0], w)
	}
	b, err := cfg.Encode()
	if err != nil {
		return err
	}
	_, err = fmt.Fprintf(std.out, "# %s: resolved configuration (defaults filled in)\n%s", pos[0], b)
	return err
}
