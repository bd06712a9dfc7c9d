package backtest

import (
	"os"
	"path/filepath"
	"testing"
)

// sharedDir returns the shared datasets folder beside the module root
// (found by walking up to go.mod), skipping the test when it is absent.
func sharedDir(t testing.TB, rel string) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			break
		}
		up := filepath.Dir(dir)
		if up == dir {
			t.Skip("module root not found; shared datasets unavailable")
		}
		dir = up
	}
	p := filepath.Join(dir, "..", "shared", rel)
	if _, err := os.Stat(p); err != nil {
		t.Skipf("shared dataset %s is absent (%v); skipping", filepath.Join("..", "shared", rel), err)
	}
	return p
}
