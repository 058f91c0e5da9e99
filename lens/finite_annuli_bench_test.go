package lens

import "testing"

// BenchmarkLightCurvePlanetaryLD: the light curve of BenchmarkLightCurvePlanetary
// with linear limb darkening u = 0.6, so that its contour points go through
// the annuli of contour_annuli.go.
func BenchmarkLightCurvePlanetaryLD(b *testing.B) {
	m, times := planetaryEvent()
	m.LD = 0.6
	dst := make([]float64, len(times))
	var e Evaluator
	for b.Loop() {
		e.ResetCounts()
		if err := e.LightCurve(dst, m, times, nil); err != nil {
			b.Fatal(err)
		}
	}
	for k, n := range e.Counts {
		b.ReportMetric(float64(n), Method(k).String()+"-pts")
	}
}
