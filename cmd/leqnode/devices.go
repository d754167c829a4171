package main

import (
	"context"
	"encoding/json"
	"fmt"
	"strconv"
	"strings"

	"github.com/leqnode/leqnode/node/capture"
)

func runDevices(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("devices", "[--format table|json]", std.err)
	format := fl.String("format", "table", "output: table or json")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("devices takes no arguments")
	}
	if err := oneOf("format", *format, "table", "json"); err != nil {
		return err
	}
	devs, err := capture.Devices()
	if err != nil {
		return err
	}
	if *format == "json" {
		enc := json.NewEncoder(std.out)
		enc.SetIndent("", "  ")
		return enc.Encode(devs)
	}
	if len(devs) == 0 {
		fmt.Fprintln(std.out, "no capture devices found")
		return nil
	}
	fmt.Fprintf(std.out, "%5s  %-40s %-6s %3s  %-7s %s\n", "index", "name", "api", "ch", "native", "usable rates (Hz)")
	for _, d := range devs {
		rates := make([]string, len(d.Rates))
		for i, r := range d.Rates {
			rates[i] = strconv.Itoa(r)
		}
		note := ""
		if d.Default {
			note += " [default]"
		}
		if d.Converts {
			note += " [converts: may resample; prefer a hw: device]"
		}
		fmt.Fprintf(std.out, "%5d  %-40s %-6s %3d  %-7d %s%s\n", d.Index, d.Name, d.HostAPI, d.InputChannels, d.DefaultRate, strings.Join(rates, " "), note)
	}
	return nil
}
