package main

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// TestMain lets a test start this test binary as the leqnode command in a child process
// (LEQNODE_TEST_ARGS holds its arguments, separated by 0x1f). PortAudio is one library per
// process and reads ALSA_CONFIG_PATH once, so the end-to-end capture tests run it in a child.
func TestMain(m *testing.M) {
	if args, ok := os.LookupEnv("LEQNODE_TEST_ARGS"); ok {
		os.Args = append([]string{"leqnode"}, strings.Split(args, "\x1f")...)
		main()
		return
	}
	os.Exit(m.Run())
}

// stopChild ends a child `leqnode run` with SIGTERM, as systemd does, and fails the test if it
// does not stop cleanly within 20 s.
func stopChild(t *testing.T, cmd *exec.Cmd, stderr *strings.Builder) {
	t.Helper()
	cmd.Process.Signal(syscall.SIGTERM)
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("leqnode run: %v\n%s", err, stderr.String())
		}
	case <-time.After(20 * time.Second):
		cmd.Process.Kill()
		t.Fatalf("leqnode run did not stop on SIGTERM\n%s", stderr.String())
	}
}

// childCmd returns a command that runs leqnode with args in a child process.
func childCmd(t testing.TB, args ...string) *exec.Cmd {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(exe)
	cmd.Env = append(os.Environ(), "LEQNODE_TEST_ARGS="+strings.Join(args, "\x1f"))
	return cmd
}

// e2eSignal is 8 s of a test signal at 48 kHz: a 1 kHz tone whose level changes every second
// (55, 70, 85, 62, 90, 48, 75, 66 dB SPL at -26 dBFS) over a noise floor, so that a second put
// in the wrong place shows.
func e2eSignal() []float32 {
	const fs = 48000
	levels := []float64{55, 70, 85, 62, 90, 48, 75, 66}
	rng := rand.New(rand.NewPCG(5, 6))
	x := make([]float32, len(levels)*fs)
	for i := range x {
		l := levels[i/fs]
		// Peak amplitude from AES17 and the sensitivity definition: SPL = dBFS - S + 94.
		amp := math.Pow(10, (l-94-26)/20)
		x[i] = float32(amp*math.Sin(2*math.Pi*1000*float64(i)/fs) + 3e-4*rng.NormFloat64())
	}
	return x
}

// storedSeconds reads the second records of a store, in time order.
func storedSeconds(t *testing.T, path string) []*record.Second {
	t.Helper()
	st, err := buffer.OpenReadOnly(path, 5*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var out []*record.Second
	err = st.Range(record.KindSecond, time.Unix(0, 0), time.Date(2200, 1, 1, 0, 0, 0, 0, time.UTC), func(r record.Record) error {
		out = append(out, r.(*record.Second))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// compareWithChain measures x with the dsp chain cut exactly where the stored seconds were cut
// (their sample counts in order, starting at sample skip) and checks each complete second
// within 0.1 dB (issue: stored seconds match `leqnode analyze` on the same signal).
func compareWithChain(t *testing.T, x []float32, skip int, secs []*record.Second) {
	t.Helper()
	m, err := dsp.NewMeter(dsp.MeterConfig{SampleRate: 48000, SensitivityDBFS: -26, Bands: dsp.Third})
	if err != nil {
		t.Fatal(err)
	}
	m.Process(x[:skip])
	var r dsp.Result
	m.Take(&r)
	pos := skip
	checked := 0
	for k, s := range secs {
		n := int(math.Round(s.Duration.Seconds() * 48000))
		if pos+n > len(x) {
			break
		}
		m.Process(x[pos : pos+n])
		pos += n
		m.Take(&r)
		if k == 0 {
			continue // the first, partial second holds the filters' start from rest
		}
		for _, c := range []struct {
			name string
			a, b float64
		}{{"LAeq", s.LAeq, r.LAeq}, {"LAFmax", s.LAFmax, r.LAFmax}, {"LZeq", s.LZeq, r.LZeq}, {"LCpeak", s.LCpeak, r.LCpeak}} {
			if math.Abs(c.a-c.b) > 0.1 {
				t.Errorf("second %d (%v, %d samples): %s stored %.2f, chain %.2f", k, s.Start.Format("15:04:05.000"), n, c.name, c.a, c.b)
			}
		}
		checked++
	}
	if checked < 5 {
		t.Errorf("only %d seconds compared", checked)
	}
}

func writeConfig(t *testing.T, dir, capture, measure string) string {
	t.Helper()
	cfg := fmt.Sprintf(`version = 1
[node]
id = "test-node"
time_zone = "UTC"
[microphone]
sensitivity_dbfs = -26
self_noise_dba = 0
[measure]
bands = "third"
settling_s = 0
%s
[store]
path = %q
commit_interval = "1s"
[capture]
%s
`, measure, filepath.Join(dir, "node.db"), capture)
	p := filepath.Join(dir, "node.toml")
	if err := os.WriteFile(p, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}
