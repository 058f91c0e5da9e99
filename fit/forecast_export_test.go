package fit

import (
	"bytes"
	"context"
	"math"
	"strconv"
	"strings"
	"testing"
)

// TestForecastTimesExport: the per-draw next-peak table reads back bit for bit
// from ECSV, and its header states the peak distribution of the forecast; a
// single lens says crossings were not searched.
func TestForecastTimesExport(t *testing.T) {
	draws := [][]float64{{100, 0.1, 20}, {101, 0.1, 20}, {130, 0.1, 20}} // the last peaks after the window
	f, err := ForecastCurves(context.Background(), draws, pacCurve, nil, 1, ForecastSettings{T1: 90, T2: 120, Points: 601})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteECSV(&buf, ForecastTimesTable(testInfo(), f)); err != nil {
		t.Fatal(err)
	}
	tab, err := ReadECSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	peak := tab.Columns[1].Float
	if len(peak) != 3 || !sameBits(peak[0], f.NextPeak[0]) || !sameBits(peak[1], f.NextPeak[1]) || !math.IsNaN(peak[2]) {
		t.Errorf("next peaks read back %v, forecast %v", peak, f.NextPeak)
	}
	if c := tab.Columns[2].Float; !math.IsNaN(c[0]) {
		t.Errorf("crossing %v without an image counter", c)
	}
	var head []string
	for _, m := range tab.Meta {
		head = append(head, m.Key+": "+m.Value)
	}
	h := strings.Join(head, "\n")
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	// two of three draws peak inside the window: median of their times, fraction 2/3
	for _, want := range []string{"next_peak: median " + g(f.Peak.Median), "in " + g(2.0/3) + " of 3 draws", "next_caustic_crossing: not searched"} {
		if !strings.Contains(h, want) {
			t.Errorf("header lacks %q:\n%s", want, h)
		}
	}
	if math.Abs(f.Peak.Median-100.5) > 1e-3 {
		t.Errorf("median of the peaks at 100 and 101 is %v", f.Peak.Median)
	}
}
