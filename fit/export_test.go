package fit

import (
	"bytes"
	"context"
	"encoding/csv"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"lensbook/lens"
)

func TestFormatUncertain(t *testing.T) {
	// Two significant digits on the smaller error, value rounded to match,
	// asymmetric errors as ^{+a}_{-b} (common practice in published tables).
	for _, c := range []struct {
		v, plus, minus float64
		want           string
	}{
		{1.23456, 0.0123, 0.0123, `1.235 \pm 0.012`},
		{1.23456, 0.0123, 0.0344, `1.235^{+0.012}_{-0.034}`},
		{29.8765, 0.51, 0.49, `29.88^{+0.51}_{-0.49}`},
		{0.0996, 0.0996, 0.0996, `0.10 \pm 0.10`},
		{2459000.12346, 0.0012, 0.0011, `2459000.1235^{+0.0012}_{-0.0011}`},
		{1.23e-4, 4.5e-6, 5.5e-6, `(1.230^{+0.045}_{-0.055})\times10^{-4}`},
		{123456, 1234, 1234, `(1.235 \pm 0.012)\times10^{5}`},
		{-0.0001, 0.012, 0.012, `0.000 \pm 0.012`},
		{0.5, math.NaN(), 0.1, `0.5`},
		{7, 0, 0, `7`},
		{3.14159, 0.5, 0.5, `3.14 \pm 0.50`},
		{45.6, 12, 13, `46^{+12}_{-13}`},
	} {
		if got := FormatUncertain(c.v, c.plus, c.minus, 2); got != c.want {
			t.Errorf("FormatUncertain(%v, +%v, −%v) = %s, want %s", c.v, c.plus, c.minus, got, c.want)
		}
	}
	if got := FormatUncertain(1.23456, 0.0123, 0.0123, 1); got != `1.23 \pm 0.01` {
		t.Errorf("1 significant digit: %s", got)
	}
}

// testSamples runs a short chain on a 3-parameter Gaussian with χ².
func testSamples(t *testing.T) (*Chain, *Samples) {
	t.Helper()
	c, err := RunEnsemble(context.Background(), EnsembleSettings{Steps: 400, Seed: 4},
		Target{Posterior: func(x []float64) (float64, float64) {
			chi := (x[0]-1)*(x[0]-1)/0.01 + (x[1]+2)*(x[1]+2) + x[2]*x[2]*1e6
			return -chi / 2, chi
		}}, Start{X: []float64{1, -2, 0}, Spread: []float64{0.1, 1, 1e-3}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	s, err := c.Samples([]string{"tE", "alpha", "q"}, []string{"d", "deg", ""})
	if err != nil {
		t.Fatal(err)
	}
	return c, s
}

func testInfo() ExportInfo {
	return ExportInfo{What: "posterior summary", Fingerprint: "abc123",
		Conventions: Conventions(lens.CentralCaustic, []ZeroPointInfo{{Name: "OGLE I", ZeroPoint: 18, TimeSystem: "HJD-UTC"}})}
}

// readCSV parses a CSV export back: metadata from the comment lines, the
// header row and the float cells.
func readCSV(t *testing.T, b []byte) (meta map[string]string, head []string, rows [][]string) {
	t.Helper()
	meta = map[string]string{}
	var body bytes.Buffer
	for _, l := range strings.SplitAfter(string(b), "\n") {
		if k, ok := strings.CutPrefix(l, "# "); ok {
			key, v, _ := strings.Cut(strings.TrimSuffix(k, "\n"), ": ")
			meta[key] = v
			continue
		}
		body.WriteString(l)
	}
	recs, err := csv.NewReader(&body).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return meta, recs[0], recs[1:]
}

func sameBits(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }

func TestSamplesCSVRoundTrip(t *testing.T) {
	_, s := testSamples(t)
	s.Chi2[3] = math.NaN() // special values survive too
	s.X[0] = math.Inf(-1)
	s.X[1] = 0.1 + 0.2 // not representable in few digits
	var buf bytes.Buffer
	if err := WriteSamplesCSV(&buf, testInfo(), s); err != nil {
		t.Fatal(err)
	}
	meta, head, rows := readCSV(t, buf.Bytes())
	if meta["lensbook"] != Version || meta["fingerprint"] != "abc123" || !strings.Contains(meta["units"], "degrees") ||
		!strings.Contains(meta["reference_point"], "central-caustic") || !strings.Contains(meta["dataset"], "zero point 18") {
		t.Errorf("header lacks version, fingerprint or conventions: %v", meta)
	}
	if want := []string{"tE [d]", "alpha [deg]", "q", "lnp", "chi2"}; !slices.Equal(head, want) {
		t.Errorf("header %q, want %q", head, want)
	}
	if len(rows) != s.Len() {
		t.Fatalf("%d rows, want %d", len(rows), s.Len())
	}
	for i, r := range rows {
		for j := range 3 {
			v, err := strconv.ParseFloat(r[j], 64)
			if err != nil || !sameBits(v, s.Row(i)[j]) {
				t.Fatalf("row %d column %d: %q does not re-read as %v", i, j, r[j], s.Row(i)[j])
			}
		}
		lp, _ := strconv.ParseFloat(r[3], 64)
		ch, _ := strconv.ParseFloat(r[4], 64)
		if !sameBits(lp, s.LogP[i]) || !sameBits(ch, s.Chi2[i]) {
			t.Fatalf("row %d: lnp/chi2 %q %q", i, r[3], r[4])
		}
	}
}

func TestSummaryECSVRoundTrip(t *testing.T) {
	_, s := testSamples(t)
	sum, err := Summarize(s)
	if err != nil {
		t.Fatal(err)
	}
	for _, write := range []func(*bytes.Buffer) error{
		func(b *bytes.Buffer) error { return WriteSummaryECSV(b, testInfo(), sum) },
		func(b *bytes.Buffer) error { return WriteSamplesECSV(b, testInfo(), s) },
	} {
		var buf bytes.Buffer
		if err := write(&buf); err != nil {
			t.Fatal(err)
		}
		tab, err := ReadECSV(&buf)
		if err != nil {
			t.Fatalf("ReadECSV of our export: %v\n%s", err, buf.String())
		}
		meta := map[string]string{}
		for _, m := range tab.Meta {
			meta[m.Key] = m.Value
		}
		if meta["lensbook"] != Version || meta["fingerprint"] != "abc123" || meta["converged"] == "" {
			t.Errorf("ECSV metadata %v", meta)
		}
		if len(tab.Columns) < 3 {
			t.Fatalf("%d columns", len(tab.Columns))
		}
	}
	// Bit-exact values in the summary table.
	var buf bytes.Buffer
	WriteSummaryECSV(&buf, testInfo(), sum)
	tab, _ := ReadECSV(&buf)
	want := SummaryTable(testInfo(), sum)
	for j, c := range want.Columns {
		got := tab.Columns[j]
		if got.Name != c.Name {
			t.Fatalf("column %d named %q, want %q", j, got.Name, c.Name)
		}
		if c.Float != nil {
			for i := range c.Float {
				if !sameBits(got.Float[i], c.Float[i]) {
					t.Errorf("%s[%d] = %v, want %v", c.Name, i, got.Float[i], c.Float[i])
				}
			}
		} else if !slices.Equal(got.String, c.String) {
			t.Errorf("%s = %q, want %q", c.Name, got.String, c.String)
		}
	}
}

func TestSummary(t *testing.T) {
	c, s := testSamples(t)
	sum, err := Summarize(s)
	if err != nil {
		t.Fatal(err)
	}
	// The best-χ² sample is the minimum over the kept samples.
	if m := slices.Min(s.Chi2); sum.BestChi2 != m {
		t.Errorf("best χ² %v, minimum %v", sum.BestChi2, m)
	}
	for i, p := range sum.Params {
		if !(p.Lower <= p.Median && p.Median <= p.Upper) || sum.Corr[i][i] != 1 || p.Tau != c.Diagnostics.Tau[i] {
			t.Errorf("%s: %+v", p.Name, p)
		}
	}
	cmp, err := CompareModes([]Summary{sum, {Mode: "b", BestChi2: sum.BestChi2 + 10}}, []int{5, 7}, 1000)
	if err != nil {
		t.Fatal(err)
	}
	// BIC = χ² + k ln n (Schwarz 1978): ΔBIC = 10 + 2 ln 1000.
	if cmp[0].DeltaChi2 != 0 || cmp[1].DeltaChi2 != 10 || math.Abs(cmp[1].DeltaBIC-(10+2*math.Log(1000))) > 1e-9 {
		t.Errorf("comparison %+v", cmp)
	}
}

func TestLaTeX(t *testing.T) {
	_, s := testSamples(t)
	sum, _ := Summarize(s)
	sum.Converged, sum.Reasons = false, []string{"chain of 400 steps shorter than 50 τ"}
	var buf bytes.Buffer
	if err := WriteLaTeX(&buf, testInfo(), []Summary{sum}, nil); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, want := range []string{"% lensbook: " + Version, `\begin{tabular}{llc}`, `$t_{\rm E}$ & d & $`, `\alpha`, "not converged", `50 τ`, `\end{tabular}`} {
		if !strings.Contains(out, want) {
			t.Errorf("LaTeX lacks %q:\n%s", want, out)
		}
	}
	if strings.Count(out, "{") != strings.Count(out, "}") {
		t.Errorf("unbalanced braces:\n%s", out)
	}
}

func TestLightCurveTable(t *testing.T) {
	times := []float64{1, 2, 3}
	tab, err := LightCurveTable(testInfo(), times, []float64{1, 2, 1}, nil, nil,
		[]CurveDataset{{Name: "OGLE", ZeroPoint: 18, Mag: []float64{19, 18.2, 19}}})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteCSV(&buf, tab); err != nil {
		t.Fatal(err)
	}
	_, head, rows := readCSV(t, buf.Bytes())
	if !slices.Equal(head, []string{"time [d]", "magnification", "mag_OGLE [mag]"}) || len(rows) != 3 || rows[1][2] != "18.2" {
		t.Errorf("light curve CSV %q %q", head, rows)
	}
	if _, err := LightCurveTable(testInfo(), times, []float64{1}, nil, nil, nil); err == nil {
		t.Error("mismatched lengths accepted")
	}
}
