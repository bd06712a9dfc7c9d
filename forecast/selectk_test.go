package forecast

import (
	"math/rand/v2"
	"slices"
	"testing"
)

func TestSelectK(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, n := range []int{1, 2, 3, 5, 10, 101, 1000} {
		for _, distinct := range []int{2, 5, 1 << 30} {
			a := make([]float64, n)
			for i := range a {
				a[i] = float64(rng.IntN(distinct))
			}
			want := slices.Clone(a)
			slices.Sort(want)
			for _, k := range []int{0, n / 2, n - 1} {
				b := slices.Clone(a)
				if got := selectK(b, k); got != want[k] {
					t.Fatalf("n=%d k=%d: got %v, want %v", n, k, got, want[k])
				}
				for i := range b {
					if (i < k && b[i] > b[k]) || (i > k && b[i] < b[k]) {
						t.Fatalf("n=%d k=%d: not partitioned at %d", n, k, i)
					}
				}
			}
		}
	}
	if median(nil) != 0 {
		t.Error("median of nothing")
	}
}

// Every arrangement of five values, with and without ties.
func TestMedian5(t *testing.T) {
	sets := [][5]float64{{1, 2, 3, 4, 5}, {1, 1, 2, 3, 3}, {2, 2, 2, 1, 3}, {-1, 0, 0, 0, 7}}
	for _, set := range sets {
		var perm func(k int)
		p := set
		perm = func(k int) {
			if k == 5 {
				s := p
				slices.Sort(s[:])
				if got := median5(p[0], p[1], p[2], p[3], p[4]); got != s[2] {
					t.Fatalf("median5%v = %v, want %v", p, got, s[2])
				}
				return
			}
			for i := k; i < 5; i++ {
				p[k], p[i] = p[i], p[k]
				perm(k + 1)
				p[k], p[i] = p[i], p[k]
			}
		}
		perm(0)
	}
}
