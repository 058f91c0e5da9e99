package view

import (
	"testing"

	"lensbook/lens"
)

var sinkMap []float32

// BenchmarkMap measures the full-resolution (512×512) and coarse (128×128)
// maps of the view's default framing of the planetary test model, computed
// in 16-row bands as View.Step does; the baseline is the same map in one
// lens.MagMap call.
func BenchmarkMap(b *testing.B) {
	v := New(planetary, 512, 512, 1)
	r := v.T.Rect()
	bl, _ := lens.NewBinary(planetary.S, planetary.Q)
	for _, n := range []int{128, 512} {
		b.Run("adaptive/"+itoa(n), func(b *testing.B) {
			m := reuseMap(nil, r, n, n)
			var sp *sampler
			exact := 0
			for range b.N {
				var err error
				if sp, err = newSampler(sp, m, planetary.S, planetary.Q, v.curves); err != nil {
					b.Fatal(err)
				}
				m.Rows = 0
				for m.Rows < m.NY {
					v.mapRows(m, sp, 2*blockPx)
				}
				exact = sp.Exact
			}
			b.ReportMetric(float64(exact)/float64(n*n), "exact/px")
			sinkMap = m.A
		})
		b.Run("whole/"+itoa(n), func(b *testing.B) {
			dst := make([]float32, n*n)
			for range b.N {
				if err := lens.MagMap(dst, bl, r, n, n); err != nil {
					b.Fatal(err)
				}
			}
			sinkMap = dst
		})
	}
}

func itoa(n int) string {
	if n == 0 {
		return "0"
	}
	s := ""
	for ; n > 0; n /= 10 {
		s = string(rune('0'+n%10)) + s
	}
	return s
}
