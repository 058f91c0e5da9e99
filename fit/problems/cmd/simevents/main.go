// Command simevents writes lensbook's simulated events as plain-text
// photometry files with their truth: the demo event (testdata/demo) and the
// recovery-test events (testdata/events). Everything is simulated by package
// lens with seeded noise (package fit/problems); rerunning the command with
// the same seed rewrites identical files.
//
//	go run ./fit/problems/cmd/simevents -demo testdata/demo -events testdata/events
package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"log"
	"math"
	"os"
	"path/filepath"
	"strings"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

const seed = 20240601

func main() {
	demo := flag.String("demo", "", "directory for the demo event (empty: skip)")
	events := flag.String("events", "", "directory for the test events (empty: skip)")
	flag.Parse()
	if *demo != "" {
		if err := writeDemo(*demo); err != nil {
			log.Fatal(err)
		}
	}
	if *events != "" {
		for _, s := range problems.All() {
			if s.Truth.Q > 0 && s.Truth.Rho > 0 && !finiteBinaryReady() {
				log.Printf("skipping %q: lens has no finite-source binary magnification yet", s.Name)
				continue
			}
			if err := writeEvent(filepath.Join(*events, slug(s.Name)), s, nil); err != nil {
				log.Fatal(err)
			}
		}
	}
}

// finiteBinaryReady reports whether lens computes finite-source binary
// magnifications (a source of radius 0.05 on a caustic needs more than the
// point-source method).
func finiteBinaryReady() bool {
	b, err := lens.NewBinary(1, 0.5)
	if err != nil {
		return false
	}
	f, err := lens.NewSolver(b).FiniteMag(complex(0.01, 0), 0.05, 0, 1e-3)
	return err == nil && f.Method != lens.PointSource
}

func slug(s string) string {
	return strings.Map(func(r rune) rune {
		if r >= 'a' && r <= 'z' || r >= '0' && r <= '9' {
			return r
		}
		if r >= 'A' && r <= 'Z' {
			return r - 'A' + 'a'
		}
		return '-'
	}, s)
}

// timeOffset per site for the demo: the survey writes HJD − 2450000, the
// follow-up sites full JD.
func writeEvent(dir string, s *problems.Spec, offsets []float64) error {
	ev, err := s.Simulate(seed)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	type siteInfo struct {
		File       string  `json:"file"`
		Name       string  `json:"name"`
		Band       string  `json:"band"`
		Columns    string  `json:"columns"`
		TimeOffset float64 `json:"timeOffset"` // add to the file's times to get full JD
		ZeroPoint  float64 `json:"zeroPoint"`
		LD         float64 `json:"ld"`
		Fs         float64 `json:"fs"`
		Fb         float64 `json:"fb"`
		N          int     `json:"n"`
	}
	truth := struct {
		Event   string             `json:"event"`
		Note    string             `json:"note"`
		Seed    int                `json:"seed"`
		Ref     string             `json:"ref"`
		Params  map[string]float64 `json:"params"`
		Sites   []siteInfo         `json:"sites"`
		Chi2    float64            `json:"chi2Truth"`
		Command string             `json:"command"`
		Units   map[string]string  `json:"units"`
	}{Event: s.Name, Note: s.Note, Seed: seed, Ref: s.Truth.Ref.String(), Command: "go run ./fit/problems/cmd/simevents -demo testdata/demo -events testdata/events",
		Params: map[string]float64{}, Units: map[string]string{"t0": "full JD (days)", "tE": "days", "alpha": "radians", "u0, s, rho": "θE"}}
	p := s.Truth.Params
	for _, k := range []fit.Param{fit.T0, fit.U0, fit.TE, fit.Rho, fit.S, fit.Q, fit.Alpha} {
		truth.Params[k.String()] = fit.Get(&p, k)
	}
	truth.Chi2, _ = problems.TruthChi2(s, ev)
	for k, d := range ev.Datasets {
		site := s.Sites[k]
		off := 0.0
		if offsets != nil {
			off = offsets[k]
		}
		name := slug(site.Name) + ".dat"
		var b strings.Builder
		fmt.Fprintf(&b, "# %s: simulated photometry (not real data), made by lensbook\n", s.Name)
		fmt.Fprintf(&b, "# site: %s, band %s, time system: simulated (treat as HJD-UTC)\n", site.Name, site.Band)
		cols := "flux"
		if site.Mags {
			cols = "mag"
			fmt.Fprintf(&b, "# magnitudes with zero point %g (m = %g - 2.5 log10 F)\n", site.ZeroPoint, site.ZeroPoint)
		} else {
			fmt.Fprintf(&b, "# fluxes in units where m = %g - 2.5 log10 F\n", site.ZeroPoint)
		}
		tcol := "jd"
		if off != 0 {
			tcol = fmt.Sprintf("jd-%d", int(off))
		}
		fmt.Fprintf(&b, "%s %s %s_err\n", tcol, cols, cols)
		for i := range d.T {
			t := d.T[i] - off
			if site.Mags {
				if !(d.Flux[i] > 0) {
					return fmt.Errorf("%s: negative flux cannot be written as a magnitude", name)
				}
				m := site.ZeroPoint - 2.5*math.Log10(d.Flux[i])
				e := 2.5 / math.Ln10 * d.Err[i] / d.Flux[i]
				fmt.Fprintf(&b, "%.5f %.5f %.5f\n", t, m, e)
			} else {
				fmt.Fprintf(&b, "%.5f %.3f %.3f\n", t, d.Flux[i], d.Err[i])
			}
		}
		if err := os.WriteFile(filepath.Join(dir, name), []byte(b.String()), 0o644); err != nil {
			return err
		}
		truth.Sites = append(truth.Sites, siteInfo{File: name, Name: site.Name, Band: site.Band, Columns: tcol + " " + cols + " " + cols + "_err",
			TimeOffset: off, ZeroPoint: site.ZeroPoint, LD: site.LD, Fs: site.Fs, Fb: site.Fb, N: d.Len()})
	}
	js, err := json.MarshalIndent(truth, "", "  ")
	if err != nil {
		return err
	}
	return os.WriteFile(filepath.Join(dir, "truth.json"), append(js, '\n'), 0o644)
}

func writeDemo(dir string) error {
	s := problems.Demo()
	return writeEvent(dir, s, []float64{2450000, 0, 0})
}
