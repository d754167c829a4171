package main

import (
	"encoding/json"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

func TestDBCheck(t *testing.T) {
	path, start := exportStore(t)
	st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return start.Add(time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	recs, _ := st.Pending("mqtt", record.KindSecond, 40)
	st.Ack("mqtt", record.KindSecond, recs[len(recs)-1].Seq())
	id := st.ID()
	st.Close()

	code, out, errs := runCmd(t, nil, "db", "check", "--db", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	line := strings.TrimSpace(out)
	t.Log(line)
	for _, want := range []string{"store " + id + " ok:", "90 second", "1 minute", "1 annotation", "1 session",
		"2026-05-03T18:29:00Z to 2026-05-03T18:30:29Z", "pending mqtt: second 50"} {
		if !strings.Contains(line, want) {
			t.Errorf("summary lacks %q: %s", want, line)
		}
	}
	if strings.Contains(line, "\n") {
		t.Errorf("summary is not one line: %q", line)
	}
	code, out, _ = runCmd(t, nil, "db", "check", "--db", path, "--format", "json")
	var js map[string]any
	if code != 0 || json.Unmarshal([]byte(out), &js) != nil || js["ok"] != true || js["store"] != id {
		t.Errorf("json: %d %s", code, out)
	}
}

func TestDBCheckDamaged(t *testing.T) {
	path, _ := exportStore(t)
	if err := os.WriteFile(path, []byte(strings.Repeat("not a store ", 2000)), 0o600); err != nil {
		t.Fatal(err)
	}
	code, _, errs := runCmd(t, nil, "db", "check", "--db", path)
	if code != 1 || !strings.Contains(errs, "damaged") {
		t.Errorf("exit %d, stderr %q", code, errs)
	}
	if b, _ := os.ReadFile(path); !strings.HasPrefix(string(b), "not a store") {
		t.Error("a reading command changed the damaged file")
	}
	if code, _, errs := runCmd(t, nil, "db", "vacuum", "--db", path); code != 2 || !strings.Contains(errs, "check") {
		t.Errorf("unknown subcommand: exit %d, %q", code, errs)
	}
}
