package daemon

import (
	"context"
	"fmt"
	"io"
	"os/user"
	"reflect"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/control"
	"github.com/leqnode/leqnode/node/lib/calibrate"
	"github.com/leqnode/leqnode/node/lib/config"
	"github.com/leqnode/leqnode/node/lib/query"
)

// startControl opens the control socket of a running node.
func (d *daemon) startControl(path string, n *node.Node, st *buffer.Store) (*control.Server, error) {
	cfg, log := d.o.Config, d.o.Logger
	gid := -1
	if cfg.Control.Group != "" {
		g, err := user.LookupGroup(cfg.Control.Group)
		if err != nil {
			return nil, configError(fmt.Errorf("control.group %q: no such group: create it or leave the key empty", cfg.Control.Group))
		}
		gid, _ = strconv.Atoi(g.Gid)
	}
	status := func() any {
		return map[string]any{
			"node": cfg.Node.ID, "site": cfg.Node.Site, "version": d.o.Version,
			"store":  map[string]any{"id": st.ID(), "path": cfg.Store.Path},
			"status": n.Status(),
		}
	}
	h := control.Handlers{
		Status: status,
		Live: func() any {
			return map[string]any{"at": time.Now().UTC(), "LAF": n.Status().LAF}
		},
		Health: func() any {
			if h := n.Health(); h != nil {
				return node.HealthJSON(h)
			}
			return map[string]any{}
		},
		Calibrate: func(ctx context.Context, reference float64) (any, error) {
			ctx, cancel := context.WithTimeout(ctx, 2*time.Minute)
			defer cancel()
			res, err := n.RequestCalibration(ctx, reference, true)
			if res == nil {
				return nil, err
			}
			sum := (&calibrate.Result{Detection: res.Detection, SensitivityDBFS: calibrate.Implied(res.Check)}).Summarize(res.Applied && res.Check.OK)
			if err != nil {
				return nil, fmt.Errorf("%v (tone at %.2f Hz, %.2f dBFS)", err, res.Detection.FrequencyHz, res.Detection.LevelDBFS)
			}
			return sum, nil
		},
		// Reading commands are answered here, against the store this daemon holds.
		Read: func(ctx context.Context, req query.Request, w io.Writer) error {
			return query.Do(ctx, st, req, w)
		},
	}
	return control.Listen(path, gid, h, log)
}

// reload re-reads the configuration on SIGHUP: the microphone settings apply at once; every
// other change is named as needing a restart. A file with problems changes nothing.
func (d *daemon) reload(cur *config.Config, n *node.Node) {
	path, log := d.o.ConfigPath, d.o.Logger
	next, err := config.Load(path)
	if err != nil {
		log.Error("reload: the configuration has problems; nothing changed", "err", strings.ReplaceAll(err.Error(), "\n", "; "))
		return
	}
	var restart []string
	for _, c := range []struct {
		name string
		a, b any
	}{
		{"node", cur.Node, next.Node}, {"capture", cur.Capture, next.Capture},
		{"measure", cur.Measure, next.Measure}, {"store", cur.Store, next.Store},
		{"control", cur.Control, next.Control},
	} {
		if !reflect.DeepEqual(c.a, c.b) {
			restart = append(restart, "["+c.name+"]")
		}
	}
	if !reflect.DeepEqual(next.Microphone.Correction, cur.Microphone.Correction) {
		restart = append(restart, "[microphone] correction")
	}
	if !reflect.DeepEqual(next.Microphone, cur.Microphone) {
		m := next.Microphone
		// A calibrated sensitivity stays in use unless the nominal one changed.
		sens := n.Sensitivity()
		if m.SensitivityDBFS != cur.Microphone.SensitivityDBFS {
			sens = d.sensitivityInUse(next)
		}
		st := node.Settings{SensitivityDBFS: sens, OverloadLevel: m.OverloadDB}
		if m.SelfNoiseDBA > 0 {
			st.UnderRangeLevel = m.SelfNoiseDBA + m.UnderRangeMarginDB
		}
		if n.Reconfigure(st) {
			cur.Microphone = m
			log.Info("reload: microphone settings applied", "sensitivity_dbfs", sens)
		}
	}
	if len(restart) > 0 {
		log.Warn("reload: these sections changed and need a restart to apply: "+strings.Join(restart, " "), "apply", "systemctl restart leqnode")
	} else {
		log.Info("reload: done")
	}
}
