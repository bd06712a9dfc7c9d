package backtest

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strings"
	"time"
)

// WriteText writes the report as plain-text tables that fit in 100
// columns: accuracy and bands per row, the methods overall, band coverage
// by step, and, when the series had rules, alerts and reaction.
func (rep *Report) WriteText(w io.Writer) error {
	bw := bufio.NewWriter(w)
	if rep.Title != "" {
		fmt.Fprintf(bw, "%s\n\n", rep.Title)
	}
	rows := append(append([]Row(nil), rep.Rows...), rep.Overall)

	fmt.Fprintf(bw, "%-28s %6s %7s %-8s %6s %6s %6s %6s %6s %7s\n",
		"", "series", "origins", "best", "rel", "MASE", "MASE", "cov80", "cov95", "wink95")
	fmt.Fprintf(bw, "%-28s %6s %7s %-8s %6s %6s %6s %6s %6s %7s\n",
		"", "", "", "baseline", "MAE", "engine", "best", "", "", "scaled")
	for i, r := range rows {
		if i == len(rows)-1 && len(rows) > 1 {
			fmt.Fprintln(bw, strings.Repeat("-", 96))
		}
		fmt.Fprintf(bw, "%-28s %6d %7d %-8s %6s %6s %6s %6s %6s %7s\n",
			clip(r.Name, 28), r.Series, r.Origins, methodOr(r.Best), num(r.RelBest, 3), num(r.MASE[Engine], 3),
			bestMASE(&r), pct(r.Cover80), pct(r.Cover95), num(r.Winkler95, 2))
	}

	o := &rep.Overall
	fmt.Fprintf(bw, "\nmethods over all series (MASE by step, relative MAE = geometric mean over series of engine MAE / method MAE)\n")
	marks := stepMarks(rep.Steps)
	fmt.Fprintf(bw, "%-9s %7s %7s", "method", "rel MAE", "MASE")
	for _, k := range marks {
		fmt.Fprintf(bw, " %7s", "@"+stepName(k, rep.Step))
	}
	fmt.Fprintln(bw)
	for m := range NumMethods {
		fmt.Fprintf(bw, "%-9s %7s %7s", MethodName(m), num(o.Rel[m], 3), num(o.MASE[m], 3))
		for _, k := range marks {
			fmt.Fprintf(bw, " %7s", num(o.MASEByStep[m][k], 3))
		}
		fmt.Fprintln(bw)
	}
	fmt.Fprintf(bw, "%-17s %7s", "coverage 80 %", "")
	for _, k := range marks {
		fmt.Fprintf(bw, " %7s", pct(o.Cover80ByStep[k]))
	}
	fmt.Fprintf(bw, "\n%-17s %7s", "coverage 95 %", "")
	for _, k := range marks {
		fmt.Fprintf(bw, " %7s", pct(o.Cover95ByStep[k]))
	}
	fmt.Fprintln(bw)

	if o.Rules > 0 || o.Changes > 0 {
		fmt.Fprintf(bw, "\nalerts (lead = (true crossing - opened) / horizon, target >= %.1f) and reaction to changes\n", leadTarget)
		fmt.Fprintf(bw, "%-28s %5s %5s %5s %6s %6s %5s %6s %6s %5s %7s %7s %5s\n",
			"", "rules", "cross", "false", "opened", "missed", "flaps", "lead", "lead", "late", "react", "react", "never")
		fmt.Fprintf(bw, "%-28s %5s %5s %5s %6s %6s %5s %6s %6s %5s %7s %7s %5s\n",
			"", "", "", "", "", "", "", "min", "median", "", "median", "p90", "")
		for i, r := range rows {
			if i == len(rows)-1 && len(rows) > 1 {
				fmt.Fprintln(bw, strings.Repeat("-", 96))
			}
			fmt.Fprintf(bw, "%-28s %5d %5d %5d %6d %6d %5d %6s %6s %5d %7s %7s %5d\n",
				clip(r.Name, 28), r.Rules, r.ShouldOpen, r.FalseIncidents, r.Opened, r.Missed, r.Flaps,
				num(r.LeadMin, 2), num(r.LeadMedian, 2), r.LeadLate, dur(r.ReactMedian), dur(r.ReactP90), r.NeverReacted)
		}
	}
	return bw.Flush()
}

func methodOr(m int) string {
	if m < 0 {
		return "-"
	}
	return MethodName(m)
}

func bestMASE(r *Row) string {
	if r.Best < 0 {
		return "-"
	}
	return num(r.MASE[r.Best], 3)
}

func clip(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return "…" + s[len(s)-n+1:]
}

func num(x float64, prec int) string {
	switch {
	case math.IsNaN(x):
		return "-"
	case math.IsInf(x, 1):
		return "inf"
	case math.IsInf(x, -1):
		return "never"
	case math.Abs(x) >= 1e5:
		return fmt.Sprintf("%.2g", x)
	}
	return fmt.Sprintf("%.*f", prec, x)
}

func pct(x float64) string {
	if math.IsNaN(x) {
		return "-"
	}
	return fmt.Sprintf("%.1f%%", 100*x)
}

func dur(d time.Duration) string {
	switch {
	case d == Never:
		return "never"
	case d < 0:
		return "-"
	case d < time.Hour:
		return fmt.Sprintf("%dm", int(d.Minutes()))
	}
	return fmt.Sprintf("%.1fh", d.Hours())
}

// stepMarks are the step indices shown in the by-step columns: +1, +3,
// +6, +12 and the last step when there are 24, scaled otherwise.
func stepMarks(steps int) []int {
	var out []int
	for _, f := range []float64{1.0 / 24, 3.0 / 24, 6.0 / 24, 12.0 / 24, 1} {
		k := int(math.Round(f*float64(steps))) - 1
		if k < 0 {
			k = 0
		}
		if len(out) == 0 || out[len(out)-1] != k {
			out = append(out, k)
		}
	}
	return out
}

func stepName(k int, step time.Duration) string {
	d := time.Duration(k+1) * step
	if d%time.Hour == 0 {
		return fmt.Sprintf("%dh", int(d.Hours()))
	}
	return fmt.Sprintf("%dm", int(d.Minutes()))
}
