package main

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// writeScoreDir writes two invented series (not real data), three days at
// five-minute steps, into a nested folder.
func writeScoreDir(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "hosts"), 0o755); err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)
	for name, f := range map[string]func(i int) float64{
		"fill.csv":        func(i int) float64 { return 0.4 + 0.02*float64(i)/288 + 0.002*math.Sin(float64(i)*1.7) },
		"hosts/cycle.csv": func(i int) float64 { return 100 + 30*math.Sin(2*math.Pi*float64(i)/288) },
	} {
		var b strings.Builder
		b.WriteString("timestamp,value\n")
		for i := range 3 * 288 {
			fmt.Fprintf(&b, "%s,%.5f\n", start.Add(time.Duration(i)*5*time.Minute).Format("2006-01-02 15:04:05"), f(i))
		}
		if err := os.WriteFile(filepath.Join(dir, name), []byte(b.String()), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

func TestReplayScore(t *testing.T) {
	dir := writeScoreDir(t)
	for _, c := range []struct {
		name string
		args []string
		code int
		want []string
	}{
		{"folder", []string{"replay", "--score", dir}, 0, []string{"2 series", "fill", "hosts/cycle", "overall", "theilsen", "coverage 95 %"}},
		{"file", []string{"replay", "--score", filepath.Join(dir, "fill.csv")}, 0, []string{"1 series", "fill"}},
		{"suite", []string{"replay", "--score", "--suite", "1", "--seed", "2", "--breach-every", "30m"}, 0,
			[]string{"scenario suite: 1 variants per family, seed 2", "steady-fill", "counter-reset", "alerts"}},
		{"no path", []string{"replay", "--score"}, 2, nil},
		{"both", []string{"replay", "--score", dir, "--suite", "2"}, 2, nil},
		{"absent", []string{"replay", "--score", filepath.Join(dir, "absent")}, 1, nil},
		{"help", []string{"replay", "--score", "--help"}, 0, nil},
	} {
		var out, errb bytes.Buffer
		code := run(context.Background(), c.args, &out, &errb)
		if code != c.code {
			t.Errorf("%s: exit %d, want %d; stderr %s", c.name, code, c.code, errb.String())
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(out.String(), w) {
				t.Errorf("%s: output lacks %q:\n%s", c.name, w, out.String())
			}
		}
		if c.name == "folder" {
			t.Logf("\n%s", out.String())
		}
	}
}
