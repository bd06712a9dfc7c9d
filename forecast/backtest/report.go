package backtest

import (
	"math"
	"slices"
	"time"
)

// Grouping says what a report's rows are.
type Grouping int

// Groupings.
const (
	ByFamily Grouping = iota // one row per family (scenario suites)
	BySeries                 // one row per series (real files)
)

// Report is a table of rows and an overall row, pooled from results.
type Report struct {
	Title   string
	Rows    []Row
	Overall Row
	Steps   int           // forecast steps
	Step    time.Duration // length of one step
}

// Row is the score of a set of series; tests assert on it.
type Row struct {
	Name    string
	Series  int // series with at least one scored forecast
	Origins int // origins scored
	Points  int // (origin, step) pairs scored
	Refused int // points the processor refused

	// MASE per method: mean over series (with a non-zero scale) of the
	// series' MAE over its in-sample one-step naive MAE (Hyndman & Koehler
	// 2006); MASEByStep the same by forecast step.
	MASE       [nMethods]float64
	MASEByStep [nMethods][]float64
	// Rel is the engine's MAE relative to each method, as the geometric
	// mean over series of the ratio of their MAEs, each series counting
	// once (the geometric-mean relative MAE; Davydenko & Fildes 2013 also
	// weigh by the number of forecasts, which lets a few long series
	// decide); below 1 the engine is better. Series where either MAE is 0
	// are left out.
	Rel [nMethods]float64
	// Best is the best single baseline, the one with the lowest geometric
	// mean MAE over the set, and RelBest = Rel[Best].
	Best    int
	RelBest float64
	// Coverage of the 80 % and 95 % bands, pooled over all scored points
	// and by step.
	Cover80, Cover95             float64
	Cover80ByStep, Cover95ByStep []float64
	// Winkler95 is the interval score of the 95 % band (Winkler 1972)
	// divided by the MASE scale, averaged over series.
	Winkler95 float64

	// Alerts of invented series with a rule.
	Rules          int     // series with a rule
	ShouldOpen     int     // of which the signal crosses
	FalseIncidents int     // series that opened an incident they should not have
	Opened         int     // incidents opened in all
	Missed         int     // crossings with no incident open
	Flaps          int     // reopenings within two hours
	LeadMin        float64 // lead / horizon, over crossing series; NaN without
	LeadMedian     float64
	LeadLate       int // crossing series whose lead is below the 0.8 target
	// Reaction to sustained changes, over series with one.
	Changes      int
	ReactMedian  time.Duration // Never when the quantile is a change never followed; -1 without changes
	ReactP90     time.Duration
	NeverReacted int
}

// NewReport pools results into rows grouped by family or series, and an
// overall row over all of them.
func NewReport(title string, results []Result, by Grouping) *Report {
	rep := &Report{Title: title}
	if len(results) > 0 {
		rep.Steps = len(results[0].N)
		rep.Step = results[0].Step
	}
	var order []string
	groups := map[string][]*Result{}
	for i := range results {
		r := &results[i]
		key := r.Name
		if by == ByFamily {
			key = r.Family
		}
		if _, ok := groups[key]; !ok {
			order = append(order, key)
		}
		groups[key] = append(groups[key], r)
	}
	for _, k := range order {
		rep.Rows = append(rep.Rows, pool(k, groups[k], rep.Steps))
	}
	all := make([]*Result, len(results))
	for i := range results {
		all[i] = &results[i]
	}
	rep.Overall = pool("overall", all, rep.Steps)
	return rep
}

// pool scores a set of series.
func pool(name string, rs []*Result, steps int) Row {
	row := Row{Name: name, Best: -1, RelBest: math.NaN(), LeadMin: math.NaN(), LeadMedian: math.NaN(), ReactMedian: -1, ReactP90: -1}
	for m := range row.MASEByStep {
		row.MASEByStep[m] = make([]float64, steps)
	}
	row.Cover80ByStep, row.Cover95ByStep = make([]float64, steps), make([]float64, steps)
	byStepN := make([]int, steps)
	nScaled := make([]int, steps)
	in80, in95 := make([]int, steps), make([]int, steps)
	var mae [nMethods][]float64
	var weight []float64
	scaled := 0
	var leads, reacts []float64
	for _, r := range rs {
		row.Refused += r.Refused
		if a := r.Alerts; a != nil {
			poolAlerts(&row, a, &leads, &reacts)
		}
		n := 0
		for _, c := range r.N {
			n += c
		}
		if n == 0 {
			continue
		}
		row.Series++
		row.Origins += r.Origins
		row.Points += n
		weight = append(weight, 1)
		var tot [nMethods]float64
		for m := range tot {
			for _, e := range r.AbsErr[m] {
				tot[m] += e
			}
			mae[m] = append(mae[m], tot[m]/float64(n))
		}
		for k := range min(steps, len(r.N)) {
			byStepN[k] += r.N[k]
			in80[k] += r.In80[k]
			in95[k] += r.In95[k]
		}
		if r.Scale > 0 {
			scaled++
			var w float64
			for k := range min(steps, len(r.N)) {
				w += r.Winkler[k]
				if r.N[k] > 0 {
					nScaled[k]++
					for m := range row.MASEByStep {
						row.MASEByStep[m][k] += r.AbsErr[m][k] / float64(r.N[k]) / r.Scale
					}
				}
			}
			row.Winkler95 += w / float64(n) / r.Scale
			for m := range row.MASE {
				row.MASE[m] += tot[m] / float64(n) / r.Scale
			}
		}
	}
	div := func(a, b int) float64 {
		if b == 0 {
			return math.NaN()
		}
		return float64(a) / float64(b)
	}
	var sum80, sum95 int
	for k := range steps {
		row.Cover80ByStep[k] = div(in80[k], byStepN[k])
		row.Cover95ByStep[k] = div(in95[k], byStepN[k])
		sum80 += in80[k]
		sum95 += in95[k]
		for m := range row.MASEByStep {
			if nScaled[k] > 0 {
				row.MASEByStep[m][k] /= float64(nScaled[k])
			} else {
				row.MASEByStep[m][k] = math.NaN()
			}
		}
	}
	row.Cover80, row.Cover95 = div(sum80, row.Points), div(sum95, row.Points)
	if scaled > 0 {
		row.Winkler95 /= float64(scaled)
		for m := range row.MASE {
			row.MASE[m] /= float64(scaled)
		}
	} else {
		row.Winkler95 = math.NaN()
		for m := range row.MASE {
			row.MASE[m] = math.NaN()
		}
	}
	ratio := make([]float64, len(weight))
	for m := range row.Rel {
		for i := range ratio {
			ratio[i] = mae[Engine][i] / mae[m][i]
		}
		row.Rel[m] = weightedGeoMean(ratio, weight)
		if len(ratio) == 1 && math.IsInf(ratio[0], 1) {
			row.Rel[m] = ratio[0] // one series against a perfect method
		}
	}
	// The best single baseline: lowest geometric mean MAE over the series
	// where every method's MAE is positive, so that all compete on the
	// same set.
	common := make([]float64, len(weight))
	for i := range common {
		common[i] = weight[i]
		for m := range mae {
			if !(mae[m][i] > 0) || math.IsInf(mae[m][i], 0) {
				common[i] = 0
			}
		}
	}
	bestGM := math.Inf(1)
	for m := Naive; m < nMethods; m++ {
		if g := weightedGeoMean(mae[m], common); g < bestGM {
			bestGM, row.Best = g, m
		}
	}
	if row.Best < 0 && len(weight) == 1 {
		// One series where some method is perfect: the lowest MAE wins.
		best := math.Inf(1)
		for m := Naive; m < nMethods; m++ {
			if mae[m][0] < best {
				best, row.Best = mae[m][0], m
			}
		}
	}
	if row.Best >= 0 {
		row.RelBest = row.Rel[row.Best]
	}
	if len(leads) > 0 {
		row.LeadMin = slices.Min(leads)
		row.LeadMedian = quantile(leads, 0.5)
	}
	if len(reacts) > 0 {
		row.ReactMedian = asDuration(quantile(reacts, 0.5))
		row.ReactP90 = asDuration(quantile(reacts, 0.9))
	}
	return row
}

// leadTarget is the lead the alert pass asks of a crossing: opened while
// at least 80 % of the horizon remained.
const leadTarget = 0.8

func poolAlerts(row *Row, a *Alerts, leads, reacts *[]float64) {
	if a.HasChange {
		row.Changes++
		if a.Reaction < 0 {
			row.NeverReacted++
			// A change never followed counts as the longest possible
			// reaction in the quantiles, so that they do not flatter.
			*reacts = append(*reacts, math.Inf(1))
		} else {
			*reacts = append(*reacts, float64(a.Reaction))
		}
	}
	if !a.HasRule {
		return
	}
	row.Rules++
	row.Opened += a.Opened
	row.Flaps += a.Flaps
	if a.ShouldOpen {
		row.ShouldOpen++
		if a.Missed {
			row.Missed++
		}
		l := a.Lead
		if math.IsNaN(l) {
			l = math.Inf(-1) // never opened
		}
		*leads = append(*leads, l)
		if !(l >= leadTarget) {
			row.LeadLate++
		}
	} else if a.Opened > 0 {
		row.FalseIncidents++
	}
}

// Never is the reaction time of a change the forecast never followed.
const Never = time.Duration(math.MaxInt64)

func asDuration(ns float64) time.Duration {
	if math.IsInf(ns, 1) || ns >= float64(math.MaxInt64) {
		return Never
	}
	return time.Duration(ns)
}
