package forecast

import "math"

// lineFit is a robust straight line through (xm, ym) with slope b, with
// what the forecast needs to know of its uncertainty.
type lineFit struct {
	xm, ym, b float64
	varB      float64 // variance of b
	sumW      float64 // Σω over the fitted points
	// Variance per unit weight of one observation, and the variance factor
	// of the parameters (a little larger: Huber's estimator gives up some
	// efficiency for robustness).
	phiObs, phiPar float64
	// phiObs for the points of one resolution group (the newest one): the
	// variance of the group from its own residuals, leaning on phiObs when
	// it has few points in the regime.
	phiGroup float64
}

// Tuning of the robust fit.
const (
	huberIter  = 30  // iteration cap; a robust start converges in far fewer
	winsorAt   = 3.0 // observation variance from residuals winsorized here (robust SDs)
	priorDof   = 8.0 // pseudo degrees of freedom behind the noise estimated from differences
	runAt      = 3.0 // a trailing residual this many SDs out counts toward a transition
	maxInflate = 4.0 // cap of the parameter variance factor relative to the noise
)

// huber fits [lo, hi) by Huber-weighted iteratively reweighted least
// squares. It starts from the median pair slope and the median intercept,
// takes the scale from the median absolute standardized residual
// (re-estimated once after the first step), and stops when the line moves
// by less than a thousandth of its standard error.
func (sc *Scratch) huber(lo, hi int, k float64, group uint8) lineFit {
	x, y, om, som, grp := sc.x[lo:hi], sc.y[lo:hi], sc.om[lo:hi], sc.som[lo:hi], sc.grp[lo:hi]
	L := len(x)
	buf := sc.buf[:L]
	b := pairSlope(x, y, buf)
	for i := range L {
		buf[i] = y[i] - b*x[i]
	}
	a := median(buf) // intercept at x = 0
	s := resScale(x, y, som, a, b, buf)
	span := x[L-1] - x[0]
	// Stop when a step moves the line by less than a thousandth of the
	// standard error of its level.
	sumOm := 0.0
	for _, w := range om {
		sumOm += w
	}
	tol := 1e-3 / math.Sqrt(sumOm)

	var xm, ym float64
	for it := 0; it < huberIter; it++ {
		// The sums of a weighted line fit, without the Σwy² a fit does not
		// need; this loop is most of the cost of a Fit.
		var sw, sx, sy, sxx, sxy float64
		ks := k * s
		for i := range L {
			xi, yi := x[i], y[i]
			r := (yi - a - b*xi) * som[i]
			w := om[i]
			if ar := math.Abs(r); ar > ks {
				w *= ks / ar
			}
			wx := w * xi
			sw += w
			sx += wx
			sy += w * yi
			sxx += wx * xi
			sxy += wx * yi
		}
		m := moments{w: sw, x: sx, y: sy, xx: sxx, xy: sxy}
		var nb float64
		xm, ym, nb, _ = m.line()
		na := ym - nb*xm
		step := math.Abs(na-a) + math.Abs(nb-b)*span
		a, b = na, nb
		if it == 0 {
			s = resScale(x, y, som, a, b, buf)
		} else if step <= tol*s {
			break
		}
	}
	// (xm, ym, b) is the line of the last step.

	// Uncertainty: winsorized residual variance for observations, Huber's
	// asymptotic factor E[ψ²]/E[ψ']² and serial correlation for the
	// parameters.
	var sw, swx, swxx, sumWin, sumPsi, gWin, acNum, acDen, zPrev float64
	in, gn := 0, 0
	for i := range L {
		z := (y[i] - ym - b*(x[i]-xm)) * som[i] / s
		az := math.Abs(z)
		zw, psi := az, az
		if zw > winsorAt {
			zw = winsorAt
		}
		if psi > k {
			psi = k
		} else {
			in++
		}
		sumWin += zw * zw
		sumPsi += psi * psi
		if grp[i] == group {
			gWin += zw * zw
			gn++
		}
		w := om[i]
		sw += w
		swx += w * x[i]
		swxx += w * x[i] * x[i]
		// Lag-one products of neighbours of one resolution, signed.
		zs := min(max(z, -winsorAt), winsorAt)
		if i > 0 && grp[i] == grp[i-1] {
			acNum += zs * zPrev
			acDen += zs * zs
		}
		zPrev = zs
	}
	mw := moments{w: sw, x: swx, xx: swxx}
	dof := float64(max(L-2, 1))
	phi := s * s * sumWin / dof / winsorMoment(winsorAt)
	// Few residuals make a poor variance: lean on the differences (which
	// standardized the data to φ ≈ 1) in proportion.
	phi = (dof*phi + priorDof) / (dof + priorDof)
	phiGroup := phi
	if gn > 0 {
		gd := float64(gn) * dof / float64(L) // the group's share of the dof
		pg := s * s * gWin / gd / winsorMoment(winsorAt)
		phiGroup = (gd*pg + priorDof*phi) / (gd + priorDof)
	}
	frac := max(float64(in)/float64(L), 0.5)
	inflate := 1.0
	if sumWin > 0 {
		inflate = (sumPsi / (frac * frac)) / (sumWin / winsorMoment(winsorAt))
		inflate = min(max(inflate, 1), maxInflate)
	}
	// Serially correlated noise carries less information than its count
	// suggests: inflate the parameter variance by the long-run variance
	// ratio (1+ρ)/(1−ρ) of AR(1) noise, ρ from the lag-one correlation of
	// the residuals (which, unlike the differences before the scan, no
	// longer hold the changes between regimes).
	kappa := 1.0
	if acDen > 0 {
		rho := min(max(acNum/acDen, 0), maxRho)
		kappa = (1 + rho) / (1 - rho)
	}
	f := lineFit{xm: xm, ym: ym, b: b, sumW: mw.w, phiObs: phi, phiPar: phi * inflate * kappa, phiGroup: phiGroup}
	if _, _, sxx, _, _ := mw.centred(); !degenerate(sxx, mw.xx) {
		f.varB = f.phiPar / sxx
	} else {
		f.b = 0
	}
	return f
}

// resScale is 1.4826 times the median absolute standardized residual of
// the line a + b·x, at least 1e-9 (standardized noise is about 1).
func resScale(x, y, som []float64, a, b float64, buf []float64) float64 {
	sum := 0.0
	for i := range x {
		buf[i] = math.Abs(y[i]-a-b*x[i]) * som[i]
		sum += buf[i]
	}
	s := 1.4826 * median(buf[:len(x)])
	if !(s > 0) {
		s = sum / float64(len(x)) * math.Sqrt(math.Pi/2)
	}
	return max(s, 1e-9)
}

// winsorMoment is E[min(Z², c²)] for a standard normal Z, which makes the
// winsorized variance consistent.
func winsorMoment(c float64) float64 {
	tail := normCDF(-c)
	dens := math.Exp(-c*c/2) / math.Sqrt(2*math.Pi)
	return (1 - 2*tail) - 2*c*dens + 2*c*c*tail
}

// lineLS is the weighted least-squares slope of the clipped points
// [lo, hi), its variance, and the time they span in hours.
func (sc *Scratch) lineLS(lo, hi int) (b, varB, span float64, ok bool) {
	if hi-lo < 3 {
		return 0, 0, 0, false
	}
	var m moments
	for i := lo; i < hi; i++ {
		m.add(sc.x[i], sc.yc[i], sc.om[i])
	}
	_, _, b, sxx := m.line()
	if sxx <= 0 {
		return 0, 0, 0, false
	}
	varB = m.rss() / float64(hi-lo-2) / sxx
	span = sc.x[hi-1] - sc.x[lo] + (sc.width[sc.grp[lo]]+sc.width[sc.grp[hi-1]])/2
	return b, varB, span, true
}

// trailingRun counts the newest points, back to lo, whose residuals from
// the line level + b·x all lie more than runAt standard deviations out on
// the same side, and returns their number and mean residual.
func (sc *Scratch) trailingRun(lo, n int, level, b, sd float64) (int, float64) {
	run, sum, neg := 0, 0.0, false
	for i := n - 1; i >= lo; i-- {
		r := sc.y[i] - level - b*sc.x[i]
		if math.Abs(r)*sc.som[i] <= runAt*sd {
			break
		}
		if run == 0 {
			neg = r < 0
		} else if (r < 0) != neg {
			break
		}
		run++
		sum += r
	}
	if run == 0 {
		return 0, 0
	}
	return run, sum / float64(run)
}

// Tail estimation: how much heavier than normal the tails of the
// residuals are on each side.
const (
	tailPoints = 240  // newest residuals of the regime looked at
	tailPrior  = 60.0 // pseudo points of a normal tail the estimate is shrunk toward
	tailMax    = 3.0  // cap of the ratio
)

// tails measures, on each side of the fitted line through [lo, hi), the
// ratio of the 2.5 % tail quantile of the standardized residuals to the
// 10 % one, relative to the same ratio of a normal distribution: 1 for
// normal noise, more for noise with spikes or drops. The estimate from n
// residuals is shrunk toward 1 as n/(n+tailPrior), since an extreme
// quantile of a few dozen points says little, and is never below 1:
// lighter tails than normal are not believed from a sample.
func (sc *Scratch) tails(lo, hi int, fit lineFit) (lower, upper float64) {
	lo = max(lo, hi-tailPoints)
	n := hi - lo
	if n < 10 {
		return 1, 1
	}
	r := sc.buf[:n]
	for i := range n {
		j := lo + i
		r[i] = (sc.y[j] - fit.ym - fit.b*(sc.x[j]-fit.xm)) * sc.som[j]
	}
	at := func(p float64) float64 { return selectK(r, min(int(p*float64(n-1)+0.5), n-1)) }
	med := at(0.5)
	q025, q10, q90, q975 := at(0.025), at(0.10), at(0.90), at(0.975)
	const normal = z95 / z80
	w := float64(n) / (float64(n) + tailPrior)
	ratio := func(far, near float64) float64 {
		if !(near > 0) || !(far > 0) {
			return 1
		}
		t := far / near / normal
		return min(max(1+w*(t-1), 1), tailMax)
	}
	return ratio(med-q025, med-q10), ratio(q975-med, q90-med)
}
