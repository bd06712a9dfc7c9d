package backtest

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"
)

// ReadCSV reads one series from a CSV with a header naming the columns
// timestamp and value (other columns are ignored). Timestamps may be
// 'YYYY-MM-DD HH:MM:SS' (UTC), RFC3339 or unix seconds. Points keep file
// order; steps may be irregular. A malformed row is an error naming its
// line; a series needs at least two points.
func ReadCSV(r io.Reader, name string) (*Series, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	head, err := cr.Read()
	if err != nil {
		return nil, fmt.Errorf("backtest: %s: header: %w", name, err)
	}
	ti, vi := -1, -1
	for i, h := range head {
		switch strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))) {
		case "timestamp":
			ti = i
		case "value":
			vi = i
		}
	}
	if ti < 0 || vi < 0 {
		return nil, fmt.Errorf("backtest: %s: header must name the columns timestamp and value", name)
	}
	s := &Series{Name: name}
	for line := 2; ; line++ {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("backtest: %s: line %d: %w", name, line, err)
		}
		if len(rec) <= max(ti, vi) {
			return nil, fmt.Errorf("backtest: %s: line %d: too few columns", name, line)
		}
		ts, err := parseTime(rec[ti])
		if err != nil {
			return nil, fmt.Errorf("backtest: %s: line %d: %w", name, line, err)
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(rec[vi]), 64)
		if err != nil {
			return nil, fmt.Errorf("backtest: %s: line %d: value: %w", name, line, err)
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("backtest: %s: line %d: value %q is not finite", name, line, rec[vi])
		}
		s.T = append(s.T, ts)
		s.V = append(s.V, v)
	}
	if len(s.T) < 2 {
		return nil, fmt.Errorf("backtest: %s: %d points, need at least 2", name, len(s.T))
	}
	s.Step = nativeStep(s.T)
	return s, nil
}

// LoadDir reads every .csv file under dir, recursively, in path order. A
// series is named by its path relative to dir without the extension, and
// its family is the folder it is in.
func LoadDir(dir string) ([]*Series, error) {
	var paths []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() && strings.EqualFold(filepath.Ext(p), ".csv") {
			paths = append(paths, p)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("backtest: %w", err)
	}
	slices.Sort(paths)
	out := make([]*Series, 0, len(paths))
	for _, p := range paths {
		s, err := LoadFile(p)
		if err != nil {
			return nil, err
		}
		rel, err := filepath.Rel(dir, p)
		if err != nil {
			rel = filepath.Base(p)
		}
		rel = filepath.ToSlash(rel)
		s.Name = strings.TrimSuffix(rel, filepath.Ext(rel))
		if i := strings.LastIndexByte(s.Name, '/'); i >= 0 {
			s.Family = s.Name[:i]
		}
		out = append(out, s)
	}
	return out, nil
}

// LoadFile reads one CSV file with ReadCSV, named after the file.
func LoadFile(path string) (*Series, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("backtest: %w", err)
	}
	defer f.Close()
	base := filepath.Base(path)
	return ReadCSV(f, strings.TrimSuffix(base, filepath.Ext(base)))
}

// parseTime reads the timestamp forms ReadCSV accepts and returns unix ms.
func parseTime(s string) (int64, error) {
	s = strings.TrimSpace(s)
	if t, err := time.Parse(time.DateTime, s); err == nil {
		return t.UnixMilli(), nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t.UnixMilli(), nil
	}
	if f, err := strconv.ParseFloat(s, 64); err == nil && !math.IsNaN(f) && math.Abs(f) < 1e14 {
		return int64(math.Round(f * 1000)), nil
	}
	return 0, fmt.Errorf("timestamp %q is neither 'YYYY-MM-DD HH:MM:SS', RFC3339 nor unix seconds", s)
}

// nativeStep is the median positive spacing of ts, a minute if there is
// none: robust to gaps, duplicates and the odd step back.
func nativeStep(ts []int64) time.Duration {
	d := make([]int64, 0, len(ts))
	for i := 1; i < len(ts); i++ {
		if g := ts[i] - ts[i-1]; g > 0 {
			d = append(d, g)
		}
	}
	if len(d) == 0 {
		return time.Minute
	}
	slices.Sort(d)
	return time.Duration(d[len(d)/2]) * time.Millisecond
}
