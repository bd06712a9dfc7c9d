package backtest

import (
	"math"
	"slices"
)

// generator makes one kind of invented series.
type generator struct {
	params []string
	gen    func(sc *scene)
}

func (g generator) has(p string) bool { return slices.Contains(g.params, p) }

// generatorOf returns the generator of a family kind.
func generatorOf(kind string) (generator, bool) {
	switch kind {
	case "steady_fill":
		return generator{[]string{"level", "noise", "outliers", "threshold", "cross_at"}, genSteadyFill}, true
	case "fill_cleanup":
		return generator{[]string{"level", "noise", "outliers", "fill_per_day", "clean_at", "drop", "refill", "margin_days"}, genFillCleanup}, true
	case "flat_then_fill":
		return generator{[]string{"level", "noise", "outliers", "fill_start_days", "threshold", "cross_at"}, genFlatThenFill}, true
	case "steps":
		return generator{[]string{"level", "noise", "outliers", "steps", "step", "ramp_minutes", "change_at", "margin_steps"}, genSteps}, true
	case "spike":
		return generator{[]string{"level", "noise", "outliers", "spike_at", "spike_height", "spike_points", "threshold"}, genSpike}, true
	case "dip_backlog":
		return generator{[]string{"level", "noise", "dip_at", "dip_minutes", "burst", "decay_minutes", "margin"}, genDipBacklog}, true
	case "noisy_flat":
		return generator{[]string{"level", "noise", "outliers", "margin_sd"}, genNoisyFlat}, true
	case "daily_cycle":
		return generator{[]string{"level", "noise", "outliers", "amplitude", "harmonic", "margin"}, genDailyCycle}, true
	case "weekly_trend":
		return generator{[]string{"level", "noise", "outliers", "amplitude", "weekend", "trend_per_day", "margin_days"}, genWeeklyTrend}, true
	case "anomalous_day":
		return generator{[]string{"level", "noise", "outliers", "amplitude", "harmonic", "anomaly_at", "anomaly", "margin"}, genAnomalousDay}, true
	case "counter_reset":
		return generator{[]string{"rate", "jitter", "reset_at", "margin_days"}, genCounterReset}, true
	}
	return generator{}, false
}

// genSteadyFill: a volume (ratio) filling at a constant rate from level,
// reaching threshold at cross_at of the scored days.
func genSteadyFill(sc *scene) {
	d := sc.d
	lvl, sd, rate, thr := d.p("level"), d.p("noise"), d.p("outliers"), d.p("threshold")
	tc := sc.d.p("cross_at") * float64(sc.n-sc.eval)
	tc += float64(sc.eval)
	slope := (thr - lvl) / tc // per minute
	for i := range sc.n {
		sc.sig[i] = min(lvl+slope*float64(i), 1)
		sc.obs[i] = clamp01(sc.sig[i] + sc.noise(sd, rate))
	}
	sc.tr.Threshold, sc.tr.Noise = thr, sd
	sc.tr.Crossing = sc.start + int64(math.Ceil(tc*60_000))
	sc.tr.Incident = true
}

// genFillCleanup: a volume filling slowly, cleaned up (a drop) at
// clean_at, then filling again more slowly. The threshold lies margin_days
// of filling above the peak, so that no one-day projection reaches it.
func genFillCleanup(sc *scene) {
	d := sc.d
	lvl, sd, rate := d.p("level"), d.p("noise"), d.p("outliers")
	fill := d.p("fill_per_day") / 1440
	tcl := sc.minuteIn("clean_at")
	drop, refill := d.p("drop"), d.p("refill")*fill
	peak := lvl + fill*float64(tcl)
	top := peak
	for i := range sc.n {
		y := lvl + fill*float64(i)
		if i >= tcl {
			y = peak - drop + refill*float64(i-tcl)
		}
		sc.sig[i] = y
		top = max(top, y)
		sc.obs[i] = clamp01(y + sc.noise(sd, rate))
	}
	sc.tr.Threshold = max(peak+d.p("margin_days")*fill*1440, top+4*sd)
	sc.tr.Noise = sd
	sc.tr.Change, sc.tr.ChangeSize = sc.at(tcl), -drop
}

// genFlatThenFill: a flat volume that starts to fill fill_start_days after
// the start and reaches threshold at cross_at of the scored days.
func genFlatThenFill(sc *scene) {
	d := sc.d
	lvl, sd, rate, thr := d.p("level"), d.p("noise"), d.p("outliers"), d.p("threshold")
	ts := int(d.p("fill_start_days") * 1440)
	tc := float64(sc.eval) + d.p("cross_at")*float64(sc.n-sc.eval)
	slope := (thr - lvl) / max(tc-float64(ts), 1) // a fill that starts at the crossing takes a minute
	for i := range sc.n {
		y := lvl
		if i > ts {
			y = min(lvl+slope*float64(i-ts), 1)
		}
		sc.sig[i] = y
		sc.obs[i] = clamp01(y + sc.noise(sd, rate))
	}
	sc.tr.Threshold, sc.tr.Noise = thr, sd
	sc.tr.Crossing = sc.start + int64(math.Ceil(tc*60_000))
	sc.tr.Incident = true
	sc.tr.Change, sc.tr.ChangeSize, sc.tr.SlopeChange = sc.at(ts), slope*1440, true
}

// genSteps: memory in bytes, piecewise constant with short ramps between
// levels; one step, the change, falls at change_at of the scored days.
// The threshold lies margin_steps of the largest step above the top level.
func genSteps(sc *scene) {
	d := sc.d
	base, sdRel, rate := d.p("level"), d.p("noise"), d.p("outliers")
	sd := sdRel * base
	k := int(math.Round(d.p("steps")))
	change := sc.minuteIn("change_at")
	// Earlier steps at least six hours apart, from twelve hours in.
	var at []int
	lo, hi := 720, change-360
	for range k - 1 {
		if hi <= lo {
			break
		}
		at = append(at, lo+d.rng.IntN(hi-lo))
	}
	at = append(at, change)
	slices.Sort(at)
	type step struct {
		at, ramp int
		from, to float64
	}
	var steps []step
	level, largest := base, 0.0
	for i, t := range at {
		if i > 0 && t-at[i-1] < 360 && t != change {
			continue
		}
		dy := d.p("step") * base
		if d.rng.IntN(2) == 0 && level-dy >= 0.5*base {
			dy = -dy
		}
		steps = append(steps, step{t, int(d.p("ramp_minutes")), level, level + dy})
		if t == change {
			sc.tr.Change, sc.tr.ChangeSize = sc.at(t), dy
		}
		level += dy
		largest = max(largest, math.Abs(dy))
	}
	top := base
	j := 0
	y := base
	for i := range sc.n {
		for j < len(steps) && i >= steps[j].at+steps[j].ramp {
			y = steps[j].to
			j++
		}
		v := y
		if j < len(steps) && i >= steps[j].at {
			s := steps[j]
			v = s.from + (s.to-s.from)*float64(i-s.at)/float64(max(s.ramp, 1))
		}
		sc.sig[i] = v
		top = max(top, v)
		sc.obs[i] = math.Max(v+sc.noise(sd, rate), 0)
	}
	sc.tr.Threshold = top + d.p("margin_steps")*largest
	sc.tr.Noise = sd
}

// genSpike: a latency (ms) flat with noise and one huge spike of a few
// points at spike_at; the threshold, threshold × level, lies between the
// level and the spike. The spike is not part of the signal.
func genSpike(sc *scene) {
	d := sc.d
	lvl, sdRel, rate := d.p("level"), d.p("noise"), d.p("outliers")
	sd := sdRel * lvl
	at := sc.minuteIn("spike_at")
	pts := int(math.Round(d.p("spike_points")))
	h := d.p("spike_height") * lvl
	for i := range sc.n {
		sc.sig[i] = lvl
		v := lvl + sc.noise(sd, rate)
		if i >= at && i < at+pts {
			v += h * (0.7 + 0.3*d.rng.Float64())
		}
		sc.obs[i] = math.Max(v, 0.1*lvl)
	}
	sc.tr.Threshold, sc.tr.Noise = d.p("threshold")*lvl, sd
}

// genDipBacklog: a queue depth (count) around level that drops to zero
// for dip_minutes at dip_at, then bursts to burst × level above normal
// and decays back with time constant decay_minutes. The threshold lies
// margin × the burst above the burst's peak: the burst is a transient.
func genDipBacklog(sc *scene) {
	d := sc.d
	lvl := math.Round(d.p("level"))
	sd := d.p("noise") * math.Sqrt(lvl) // Poisson-like spread
	at := sc.minuteIn("dip_at")
	dip := int(d.p("dip_minutes"))
	b := d.p("burst") * lvl
	tau := d.p("decay_minutes")
	for i := range sc.n {
		y := lvl
		switch {
		case i >= at && i < at+dip:
			y = 0
		case i >= at+dip:
			y = lvl + b*math.Exp(-float64(i-at-dip)/tau)
		}
		sc.sig[i] = y
		v := 0.0
		if y > 0 {
			v = math.Max(math.Round(y+sc.noise(sd, 0)), 0)
		}
		sc.obs[i] = v
	}
	sc.tr.Threshold = lvl + b*(1+d.p("margin"))
	sc.tr.Noise = sd
}

// genNoisyFlat: a utilisation ratio, flat with large noise; the
// threshold is margin_sd noise SDs above the level.
func genNoisyFlat(sc *scene) {
	d := sc.d
	lvl, sd, rate := d.p("level"), d.p("noise"), d.p("outliers")
	for i := range sc.n {
		sc.sig[i] = lvl
		sc.obs[i] = clamp01(lvl + sc.noise(sd, rate))
	}
	sc.tr.Threshold, sc.tr.Noise = lvl+d.p("margin_sd")*sd, sd
}

// daily is a daily cycle with a random phase: a sine plus a second
// harmonic, scaled so that its peak is amp.
type daily struct {
	amp, harm, phase float64
}

func newDaily(sc *scene, amp, harm float64) daily {
	return daily{amp, harm, sc.d.rng.Float64() * 2 * math.Pi}
}

func (c daily) at(minute int) float64 {
	x := 2*math.Pi*float64(minute)/1440 + c.phase
	return c.amp * (math.Sin(x) + c.harm*math.Sin(2*x)) / (1 + c.harm)
}

// genDailyCycle: a request rate (count per second) with a daily cycle;
// the threshold lies margin × the amplitude above the peak.
func genDailyCycle(sc *scene) {
	d := sc.d
	lvl, sdRel, rate := d.p("level"), d.p("noise"), d.p("outliers")
	c := newDaily(sc, d.p("amplitude")*lvl, d.p("harmonic"))
	top := 0.0
	for i := range sc.n {
		y := lvl + c.at(i)
		sc.sig[i] = y
		top = max(top, y)
		sc.obs[i] = math.Max(y+sc.noise(sdRel*lvl, rate), 0)
	}
	sc.tr.Threshold = top + d.p("margin")*c.amp
	sc.tr.Noise = sdRel * lvl
}

// genWeeklyTrend: a request rate with a daily cycle, weekends lower by
// the fraction weekend, and a linear upward trend. The threshold lies
// margin_days of trend above the highest signal before the scored days;
// whether and when the signal crosses it is read off the signal.
func genWeeklyTrend(sc *scene) {
	d := sc.d
	lvl, sdRel, rate := d.p("level"), d.p("noise"), d.p("outliers")
	c := newDaily(sc, d.p("amplitude")*lvl, 0)
	wk := d.p("weekend")
	trend := d.p("trend_per_day") * lvl / 1440
	// Minutes from the start to the Monday 00:00 before it, for weekdays.
	dayOfWeek := (sc.start/86_400_000 + 3) % 7 // 1970-01-01 was a Thursday (common knowledge)
	minuteOfWeek := int(dayOfWeek*1440 + (sc.start%86_400_000)/60_000)
	top := 0.0
	for i := range sc.n {
		y := lvl + trend*float64(i) + c.at(i)
		if ((minuteOfWeek+i)/1440)%7 >= 5 {
			y *= 1 - wk
		}
		sc.sig[i] = y
		if i < sc.eval {
			top = max(top, y)
		}
		sc.obs[i] = math.Max(y+sc.noise(sdRel*lvl, rate), 0)
	}
	sc.tr.Threshold = top + d.p("margin_days")*trend*1440
	sc.tr.Noise = sdRel * lvl
	for i, y := range sc.sig {
		if y >= sc.tr.Threshold {
			sc.tr.Crossing = sc.at(i)
			sc.tr.Incident = true
			break
		}
	}
}

// genAnomalousDay: a daily cycle whose amplitude is anomaly times larger
// for one day starting at anomaly_at; the threshold lies margin × the
// amplitude above the anomalous peak.
func genAnomalousDay(sc *scene) {
	d := sc.d
	lvl, sdRel, rate := d.p("level"), d.p("noise"), d.p("outliers")
	c := newDaily(sc, d.p("amplitude")*lvl, d.p("harmonic"))
	at := sc.minuteIn("anomaly_at")
	k := d.p("anomaly")
	top := 0.0
	for i := range sc.n {
		s := c.at(i)
		if i >= at && i < at+1440 {
			s *= k
		}
		y := lvl + s
		sc.sig[i] = y
		top = max(top, y)
		sc.obs[i] = math.Max(y+sc.noise(sdRel*lvl, rate), 0)
	}
	sc.tr.Threshold = top + d.p("margin")*c.amp
	sc.tr.Noise = sdRel * lvl
}

// genCounterReset: a monotone counter (e.g. bytes sent) growing at rate
// per minute with jittered increments, reset to zero at reset_at. The
// threshold lies margin_days of growth above the value at the reset, so
// nothing should open before it and the reset must not open one after.
func genCounterReset(sc *scene) {
	d := sc.d
	r, jit := d.p("rate"), d.p("jitter")
	reset := sc.minuteIn("reset_at")
	var c float64
	for i := range sc.n {
		if i == reset {
			c = 0
		}
		inc := math.Max(r*(1+jit*d.rng.NormFloat64()), 0)
		if i > 0 && i != reset {
			c += inc
		}
		sig := r * float64(i)
		if i >= reset {
			sig = r * float64(i-reset)
		}
		sc.sig[i] = sig
		sc.obs[i] = math.Round(c)
	}
	sc.tr.Threshold = r*float64(reset) + d.p("margin_days")*r*1440
	sc.tr.Noise = r * jit
}
