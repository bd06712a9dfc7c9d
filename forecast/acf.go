package forecast

import "math"

// ACF stores in dst the sample autocorrelation of x at lags 0..maxLag and
// returns it, reusing dst's capacity. The convention is the classical one:
// the mean is removed, and every lag is divided by the same denominator,
// the sum of squared deviations over the whole series,
//
//	r_k = Σ_{t} (x_t − x̄)(x_{t+k} − x̄) / Σ_t (x_t − x̄)²,
//
// so r_0 = 1 and r_k shrinks toward 0 as k nears len(x) (the estimate is
// biased, but its sequence is positive definite). NaN values are gaps: the
// mean and the denominator are taken over the other values, and a product
// with a gap is left out of its sum. Without gaps this is exactly the
// usual definition.
//
// Lags stop at len(x)−1, so the result has min(maxLag, len(x)−1)+1
// entries; it is empty for a negative maxLag or an empty x. A series with
// no spread (constant, or fewer than one value besides gaps) has no
// autocorrelation: every entry is then NaN.
func ACF(x []float64, maxLag int, dst []float64) []float64 {
	n := len(x)
	L := min(maxLag, n-1)
	if L < 0 {
		return dst[:0]
	}
	dst = grow(dst, L+1)
	sum, cnt := 0.0, 0
	for _, v := range x {
		if v == v {
			sum += v
			cnt++
		}
	}
	m := sum / float64(cnt)
	den := 0.0
	for _, v := range x {
		if v == v {
			den += (v - m) * (v - m)
		}
	}
	if !(den > 0) || math.IsInf(den, 0) {
		for k := range dst {
			dst[k] = math.NaN()
		}
		return dst
	}
	for k := 0; k <= L; k++ {
		s := 0.0
		for t := 0; t+k < n; t++ {
			a, b := x[t], x[t+k]
			if a == a && b == b { // false for NaN
				s += (a - m) * (b - m)
			}
		}
		dst[k] = s / den
	}
	return dst
}

// lagSums fills r[k], k = 0..len(r)−1, with Σ_t d_t·d_{t+k}/den for a
// series d that is already centred and has zeros in its gaps: the inner
// loop of ACF without the tests, four products per step.
func lagSums(d []float64, den float64, r []float64) {
	n := len(d)
	inv := 1 / den
	for k := range r {
		a, b := d[:n-k], d[k:n]
		b = b[:len(a)]
		var s0, s1, s2, s3 float64
		t := 0
		for ; t+4 <= len(a); t += 4 {
			s0 += a[t] * b[t]
			s1 += a[t+1] * b[t+1]
			s2 += a[t+2] * b[t+2]
			s3 += a[t+3] * b[t+3]
		}
		for ; t < len(a); t++ {
			s0 += a[t] * b[t]
		}
		r[k] = (s0 + s1 + s2 + s3) * inv
	}
}

// bartlett stores in se the standard error of r[k] under the hypothesis
// that the series is a moving average of order k−1, Bartlett's formula
//
//	se_k² = (1 + 2 Σ_{j=1}^{k−1} r_j²) / n  (k ≥ 1), se_0 = 0,
//
// for n observations; a band of ±z·se_k around zero is the usual test of
// r_k. It returns se[:len(r)].
func bartlett(r []float64, n int, se []float64) []float64 {
	se = grow(se, len(r))
	if len(r) == 0 {
		return se
	}
	se[0] = 0
	sum := 0.0
	for k := 1; k < len(r); k++ {
		se[k] = math.Sqrt((1 + 2*sum) / float64(n))
		sum += r[k] * r[k]
	}
	return se
}
