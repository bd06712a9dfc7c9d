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

// ReadRows calls fn with every row of a CSV with a header naming the
// columns timestamp and value (other columns are ignored), in file order.
// Timestamps may be 'YYYY-MM-DD HH:MM:SS' (UTC), RFC3339 or unix seconds
// (see ParseTime). fn gets the line the row starts on; a malformed row
// is an error naming its line. Values are passed on as read, NaN and
// infinities included, for fn to judge.
func ReadRows(r io.Reader, fn func(line int, ts int64, v float64) error) error {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	head, err := cr.Read()
	if err != nil {
		return fmt.Errorf("header: %w", err)
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
		return errors.New("header must name the columns timestamp and value")
	}
	// Lines are the file's, as the reader counts them: blank lines and
	// quoted line breaks make them differ from a count of rows.
	line, _ := cr.FieldPos(0)
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			line++
			if pe := (*csv.ParseError)(nil); errors.As(err, &pe) {
				line = pe.StartLine
			}
			return fmt.Errorf("line %d: %w", line, err)
		}
		line, _ = cr.FieldPos(0)
		if len(rec) <= max(ti, vi) {
			return fmt.Errorf("line %d: too few columns", line)
		}
		ts, err := ParseTime(rec[ti])
		if err != nil {
			return fmt.Errorf("line %d: %w", line, err)
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(rec[vi]), 64)
		if err != nil {
			return fmt.Errorf("line %d: value: %w", line, err)
		}
		if err := fn(line, ts, v); err != nil {
			return err
		}
	}
}

// ReadCSV reads one series from a CSV as ReadRows does. Points keep file
// order; steps may be irregular. A malformed row or a value that is not
// finite is an error naming its line; a series needs at least two points.
func ReadCSV(r io.Reader, name string) (*Series, error) {
	s := &Series{Name: name}
	err := ReadRows(r, func(line int, ts int64, v float64) error {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("line %d: value %v is not finite", line, v)
		}
		s.T = append(s.T, ts)
		s.V = append(s.V, v)
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("backtest: %s: %w", name, err)
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

// ParseTime reads the timestamp forms of ReadRows and returns unix ms.
func ParseTime(s string) (int64, error) {
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
// none: robust to gaps, duplicates and the odd step back. A spacing of
// more than the longest Duration (292 years) counts as the longest.
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
	return time.Duration(min(d[len(d)/2], math.MaxInt64/int64(time.Millisecond))) * time.Millisecond
}
