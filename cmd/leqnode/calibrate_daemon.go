package main

import (
	"context"
	"fmt"
	"math"

	"github.com/leqnode/leqnode/node/control"
	"github.com/leqnode/leqnode/node/lib/calibrate"
)

// calibrateDaemon asks the running node to take the next stable calibrator tone through its
// control socket.
func calibrateDaemon(ctx context.Context, std stdio, cfgPath string, req calibrate.Request, format string) error {
	d, err := connectDaemon(ctx, cfgPath)
	if err != nil {
		return err
	}
	sum, err := d.RequestCheck(ctx, req)
	if err != nil {
		return err
	}
	if format == "json" {
		return writeCalibrateJSON(std.out, sum)
	}
	_, err = fmt.Fprintf(std.out, "tone %.2f Hz, measured %.2f dBFS, sensitivity %.2f dBFS over %.2f s, ok %v\n",
		deref(sum.FrequencyHz), deref(sum.MeasuredDBFS), deref(sum.SensitivityDBFS), deref(sum.StableS), sum.OK)
	return err
}

func deref(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

// connectDaemon returns the running node's calibration service, reached through its control
// socket (the configured one, LEQNODE_CONTROL, or the default under systemd).
func connectDaemon(ctx context.Context, cfgPath string) (calibrate.Requester, error) {
	sf := storeFlags{db: new(string), config: &cfgPath}
	c := control.NewClient(sf.socket())
	if !c.Available() {
		return nil, fmt.Errorf("%w at %s: start the node, give --config with its [control] socket, or give a recording of the calibrator instead, e.g. leqnode calibrate --reference 94 check.wav", calibrate.ErrNoControlSocket, sf.socket())
	}
	return daemonCalibrator{c}, nil
}

// daemonCalibrator asks a running node, through its control socket, to take the next tone.
type daemonCalibrator struct{ c *control.Client }

func (d daemonCalibrator) RequestCheck(ctx context.Context, req calibrate.Request) (calibrate.Summary, error) {
	if req.Timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, req.Timeout)
		defer cancel()
	}
	var sum calibrate.Summary
	err := d.c.Calibrate(ctx, req.Reference, &sum)
	return sum, err
}
