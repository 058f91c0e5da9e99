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
				if sp, err = newSampler(sp, m, planetary.S, planetary.Q, v.curves, map[bool]float64{true: coarseTol, false: relTol}[n < 512]); err != nil {
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

// dragData is a 3,000-point dataset of the planetary test model (exact, unit errors).
func dragData(b *testing.B) *Data {
	tt := make([]float64, 3000)
	for i := range tt {
		tt[i] = planetary.T0 - 40 + 80*float64(i)/2999
	}
	a := make([]float64, len(tt))
	if err := lens.LightCurve(a, &planetary, tt, nil); err != nil {
		b.Fatal(err)
	}
	flux, errs := make([]float64, len(tt)), make([]float64, len(tt))
	for i := range a {
		flux[i], errs[i] = 1000*a[i]+300, 10
	}
	var d Data
	if err := d.Set([]Series{{Name: "sim", T: tt, Flux: flux, Err: errs}}); err != nil {
		b.Fatal(err)
	}
	return &d
}

// BenchmarkDragUpdate is the work of one drag frame for a 3,000-point event:
// move the trajectory, recompute the plotted curve (GridN points) and the
// total χ² with fit's likelihood. The baseline is the bare point-source light
// curve at the 3,000 data times (lens.LightCurve).
func BenchmarkDragUpdate(b *testing.B) {
	for _, rho := range []float64{0, 0.005} {
		m := planetary
		m.Rho = rho
		b.Run("step/rho="+map[bool]string{true: "0", false: "0.005"}[rho == 0], func(b *testing.B) {
			v := New(m, 512, 512, 1)
			for !v.MapDone() {
				v.Step(1e9)
			}
			v.Chi2Func = dragData(b).Chi2
			line, _, _ := v.Grips()
			v.PointerDown(line[0], line[1])
			b.ResetTimer()
			for i := range b.N {
				v.PointerMove(line[0]+float64(i%20+1), line[1]+float64(i%20+1))
				if ch := v.Step(0); !ch.Model || v.Err != nil {
					b.Fatalf("no model update (%v)", v.Err)
				}
			}
		})
	}
	b.Run("baseline-lightcurve", func(b *testing.B) {
		d := dragData(b)
		a := make([]float64, 3000)
		var e lens.Evaluator
		m := planetary
		for i := range b.N {
			m.U0 = planetary.U0 + 1e-4*float64(i%20)
			if err := e.LightCurve(a, &m, d.sets[0].T, nil); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// BenchmarkPaint renders a frame of the 2-D canvas fallback (map and overlay);
// the baseline paints the same map through the general resampling path that
// panning and zooming use instead of the row copy.
func BenchmarkPaint(b *testing.B) {
	v := New(planetary, 512, 512, 1)
	for !v.MapDone() {
		v.Step(1e9)
	}
	var f Frame
	b.Run("frame", func(b *testing.B) {
		for range b.N {
			v.Paint(&f)
		}
	})
	b.Run("baseline-resample", func(b *testing.B) {
		tr := v.T
		tr.CX += 1e-9 // defeats the exact-view fast path
		for range b.N {
			PaintMaps(&f, tr, v.full, v.coarse)
			DrawScene(&f, v.Scene())
		}
	})
}
