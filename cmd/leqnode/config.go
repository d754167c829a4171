package main

import (
	"context"
	"fmt"

	"github.com/leqnode/leqnode/node/config"
)

func runConfig(ctx context.Context, std stdio, args []string) error {
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
		fmt.Fprintln(std.err, err)
		return usageError{fmt.Errorf("%s: the configuration has problems (listed above)", pos[0])}
	}
	b, err := cfg.Encode()
	if err != nil {
		return err
	}
	fmt.Fprintf(std.out, "# %s: resolved configuration (defaults filled in)\n", pos[0])
	_, err = std.out.Write(b)
	return err
}
