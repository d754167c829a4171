package main

import (
	"bytes"
	"encoding/csv"
	"os"
	"testing"

	"github.com/leqnode/leqnode/node/collect"
)

func readCSVRows(t *testing.T, path string) [][]string {
	t.Helper()
	data, err := os.ReadFile(path)
	if err == nil {
		var rows [][]string
		if rows, err = csv.NewReader(bytes.NewReader(data)).ReadAll(); err == nil {
			return rows
		}
	}
	t.Fatalf("%s: %v", path, err)
	return nil
}

func writeFile(t *testing.T, p, s string) {
	t.Helper()
	if err := os.WriteFile(p, []byte(s), 0o600); err != nil {
		t.Fatal(err)
	}
}

func mustCollectorConfig(t *testing.T, p string) *collect.Config {
	t.Helper()
	c, err := collect.LoadConfig(p)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func absDiff(a, b float64) float64 {
	if a > b {
		return a - b
	}
	return b - a
}

func orNull(p *float64) any {
	if p == nil {
		return nil
	}
	return *p
}
