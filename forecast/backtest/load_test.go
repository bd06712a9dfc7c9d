package backtest

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func TestReadCSV(t *testing.T) {
	in := "timestamp,value\n" +
		"2014-04-01 00:00:00,1\n" +
		"2014-04-01 00:05:00,2\n" +
		"2014-04-01 00:05:00,2.5\n" + // a duplicate time is kept
		"2014-04-01 00:10:00,3\n" +
		"2014-04-01 00:25:00,4\n" + // a gap
		"2014-04-01 00:20:00,5\n" + // a step back is kept in file order
		"2014-04-01T00:30:00Z,6\n" +
		"1396312500,7\n"
	s, err := ReadCSV(strings.NewReader(in), "x")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.T) != 8 || s.V[5] != 5 || s.T[5] != s.T[0]+20*60_000 || s.T[7] != s.T[0]+35*60_000 {
		t.Errorf("got %v %v", s.T, s.V)
	}
	if s.Step != 5*time.Minute {
		t.Errorf("step %v, want 5m (the median spacing)", s.Step)
	}
}

func TestReadCSVErrors(t *testing.T) {
	for _, c := range []struct{ name, in, want string }{
		{"empty", "", "header"},
		{"no value column", "timestamp,v\n2014-04-01 00:00:00,1\n", "header must name"},
		{"bad time", "timestamp,value\n2014-04-01 00:00:00,1\nyesterday,2\n", "line 3"},
		{"bad value", "timestamp,value\n2014-04-01 00:00:00,x\n", "line 2: value"},
		{"not finite", "timestamp,value\n2014-04-01 00:00:00,NaN\n", "not finite"},
		{"short row", "timestamp,value\n2014-04-01 00:00:00\n", "too few columns"},
		{"one point", "timestamp,value\n2014-04-01 00:00:00,1\n", "at least 2"},
		{"bad quote", "timestamp,value\n\"2014,1\n", "line"},
	} {
		_, err := ReadCSV(strings.NewReader(c.in), "x")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}
}

func TestLoadDir(t *testing.T) {
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "a", "b"), 0o755); err != nil {
		t.Fatal(err)
	}
	files := map[string]string{
		"a/b/one.csv": "timestamp,value\n2014-04-01 00:00:00,1\n2014-04-01 00:01:00,2\n",
		"two.csv":     "timestamp,value\n2014-04-01 00:00:00,1\n2014-04-01 00:10:00,2\n",
		"note.txt":    "not a series",
	}
	for p, c := range files {
		if err := os.WriteFile(filepath.Join(dir, p), []byte(c), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	ss, err := LoadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(ss) != 2 || ss[0].Name != "a/b/one" || ss[0].Family != "a/b" || ss[1].Name != "two" || ss[1].Step != 10*time.Minute {
		t.Errorf("got %d series: %+v", len(ss), ss)
	}
	if err := os.WriteFile(filepath.Join(dir, "bad.csv"), []byte("timestamp,value\nx,1\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := LoadDir(dir); err == nil || !strings.Contains(err.Error(), "bad") {
		t.Errorf("bad file: %v", err)
	}
	if _, err := LoadDir(filepath.Join(dir, "absent")); err == nil {
		t.Error("absent folder loaded")
	}
}

// The real files load, irregular steps and all.
func TestLoadNAB(t *testing.T) {
	ss, err := LoadDir(sharedDir(t, "datasets/nab/data"))
	if err != nil {
		t.Fatal(err)
	}
	if len(ss) < 20 {
		t.Errorf("%d files", len(ss))
	}
}
