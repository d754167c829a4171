package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
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
	return writeDevices(std.out, devs, *format)
}

// noDevicesHint is what `devices` says when it finds no capture device.
const noDevicesHint = `no capture devices found. Check:
  - the microphone is plugged in and seen by the system: lsusb, and arecord -l (alsa-utils) lists its card;
  - this user may open audio devices: be root or in the group audio (id shows the groups);
  - no other program holds the device exclusively (fuser -v /dev/snd/*);
  - PortAudio is in this build: a pure-Go build (make build-purego) lists no devices; capture with
    [capture] kind = "arecord" and a device such as "hw:CARD=Mic,DEV=0" instead.`

// writeDevices prints the capture devices as a table, or as a JSON array ([] when there are
// none, never null).
func writeDevices(w io.Writer, devs []capture.DeviceInfo, format string) error {
	if format == "json" {
		if devs == nil {
			devs = []capture.DeviceInfo{}
		}
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(devs)
	}
	if len(devs) == 0 {
		_, err := fmt.Fprintln(w, noDevicesHint)
		return err
	}
	p := &printer{w: w}
	p.printf("%5s  %-40s %-6s %3s  %-7s %s\n", "index", "name", "api", "ch", "native", "usable rates (Hz)")
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
		p.printf("%5d  %-40s %-6s %3d  %-7d %s%s\n", d.Index, d.Name, d.HostAPI, d.InputChannels, d.DefaultRate, strings.Join(rates, " "), note)
	}
	return p.err
}
