package fit_test

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

type truthFile struct {
	Event  string             `json:"event"`
	Seed   uint64             `json:"seed"`
	Params map[string]float64 `json:"params"`
	Sites  []struct {
		File       string  `json:"file"`
		Name       string  `json:"name"`
		Band       string  `json:"band"`
		TimeOffset float64 `json:"timeOffset"`
		ZeroPoint  float64 `json:"zeroPoint"`
		LD         float64 `json:"ld"`
		N          int     `json:"n"`
	} `json:"sites"`
	Chi2 float64 `json:"chi2Truth"`
}

// loadTestdata reads a simulated event from testdata through the photometry
// importer, with the importer's own proposals checked against truth.json.
func loadTestdata(t *testing.T, dir string) (*truthFile, *fit.Event) {
	t.Helper()
	js, err := os.ReadFile(filepath.Join(dir, "truth.json"))
	if err != nil {
		t.Fatal(err)
	}
	var tr truthFile
	if err := json.Unmarshal(js, &tr); err != nil {
		t.Fatal(err)
	}
	ev := fit.NewEvent(tr.Event)
	for _, s := range tr.Sites {
		ev.Datasets = append(ev.Datasets, importSite(t, dir, s.File, s.N, func(opt *fit.ImportOptions) {
			if opt.TimeOffset != s.TimeOffset {
				t.Errorf("%s: importer proposes time offset %v, file has %v", s.File, opt.TimeOffset, s.TimeOffset)
			}
			opt.TimeOffset, opt.ZeroPoint, opt.Name, opt.Band, opt.LD = s.TimeOffset, s.ZeroPoint, s.Name, s.Band, s.LD
		}))
	}
	return &tr, ev
}

// importSite reads one photometry file of a simulated event through the
// importer (Sniff, then Parse with the proposals adjusted by confirm, as a user
// would) and requires all n points accepted.
func importSite(t *testing.T, dir, file string, n int, confirm func(*fit.ImportOptions)) *fit.Dataset {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(dir, file))
	if err != nil {
		t.Fatal(err)
	}
	pv, err := fit.Sniff(file, data)
	if err != nil {
		t.Fatal(err)
	}
	opt := pv.Proposed
	confirm(&opt)
	d, err := fit.Parse(file, data, opt)
	if err != nil {
		t.Fatal(err)
	}
	if d.Len() != n || len(d.Source.Rejected) != 0 {
		t.Fatalf("%s: %d points (%d rejected), want %d", file, d.Len(), len(d.Source.Rejected), n)
	}
	return d
}

// The demo files are what the generator command writes: re-simulating with
// the recorded seed gives the same points to the files' rounding, and χ² at the
// truth matches the recorded value. (A regression guard on the files and a
// check that the documented command is the one that made them.)
func TestDemoFilesMatchGenerator(t *testing.T) {
	tr, ev := loadTestdata(t, filepath.Join("..", "testdata", "demo"))
	spec := problems.Demo()
	sim, err := spec.Simulate(tr.Seed)
	if err != nil {
		t.Fatal(err)
	}
	for k, d := range ev.Datasets {
		s := sim.Datasets[k]
		if d.Len() != s.Len() {
			t.Fatalf("dataset %d: %d points, simulation %d", k, d.Len(), s.Len())
		}
		for i := range d.T {
			// times written with 5 decimals; fluxes with 3 decimals or magnitudes with 5
			if math.Abs(d.T[i]-s.T[i]) > 6e-6 || math.Abs(d.Flux[i]/s.Flux[i]-1) > 2e-4 || math.Abs(d.Err[i]/s.Err[i]-1) > 3e-3 {
				t.Fatalf("dataset %d point %d: file (%v, %v, %v) vs simulation (%v, %v, %v)", k, i, d.T[i], d.Flux[i], d.Err[i], s.T[i], s.Flux[i], s.Err[i])
			}
		}
	}
	l := mustLikelihood(t, ev)
	p := spec.Truth.Params
	c, err := l.Chi2(&p)
	if err != nil {
		t.Fatal(err)
	}
	if n := float64(l.N()); math.Abs(c-tr.Chi2) > 0.01*n {
		t.Errorf("χ²(truth) from the files %v, recorded %v", c, tr.Chi2)
	}
	if n := ev.NumUsed(); n < 2500 || n > 3500 {
		t.Errorf("demo has %d points, want about 3000", n)
	}
}

func TestEventFilesLoad(t *testing.T) {
	dirs, _ := filepath.Glob(filepath.Join("..", "testdata", "events", "*", "truth.json"))
	for i := range dirs {
		dirs[i] = filepath.Dir(dirs[i])
	}
	if len(dirs) < 3 {
		t.Fatalf("found %d simulated events in testdata/events", len(dirs))
	}
	for _, dir := range dirs {
		tr, ev := loadTestdata(t, dir)
		l := mustLikelihood(t, ev)
		var p = truthParams(tr.Params)
		c, err := l.Chi2(&p)
		if err != nil {
			t.Fatal(err)
		}
		if n := float64(l.N()); math.Abs(c-n) > 6*math.Sqrt(2*n) {
			t.Errorf("%s: χ²(truth) = %v for %v points", dir, c, n)
		}
	}
}

func truthParams(m map[string]float64) (p lens.Params) {
	for k, v := range m {
		q, err := fit.ParseParam(k)
		if err != nil {
			panic(err)
		}
		fit.Set(&p, q, v)
	}
	return p
}
