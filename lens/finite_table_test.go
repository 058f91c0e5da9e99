package lens

import (
	"bufio"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
)

// The finite-source reference table: brute-force magnifications (image-plane
// method, finite_imageplane_test.go) at points drawn on and near the caustics
// of the ρ × q × s grid of issue 3, stored in testdata/finite/reference.csv so
// that CI checks FiniteMag against them in a fraction of a second. Regenerate
// with
//
//	go test ./lens -run TestWriteFiniteReference -timeout 3h -args -update-finite-ref
//
// (about 8 min of CPU, 4 min on two cores; progress goes to the test log).

var updateFiniteRef = flag.Bool("update-finite-ref", false, "regenerate testdata/finite/reference.csv (slow)")

const (
	finiteRefPath = "testdata/finite/reference.csv"
	finiteRefCmd  = "go test ./lens -run TestWriteFiniteReference -timeout 3h -args -update-finite-ref"
	// finiteRefAcc is the relative accuracy asked of the brute force: for the
	// uniform disk its rigorous bound, for the limb-darkened one the change
	// under a halving of the leaf size.
	finiteRefAcc = 2e-5
	// finiteRefLD is the linear limb-darkening coefficient u of the
	// limb-darkened rows (Γ = 0.5).
	finiteRefLD = 0.6
)

// finiteRefRow is one row of the table.
type finiteRefRow struct {
	s, q, rho, u float64
	zeta         complex128
	mag, err     float64 // reference magnification and its error estimate (absolute)
	bound        float64 // rigorous error bound (absolute; NaN for limb-darkened rows)
	draw, class  string
	line         int
}

const finiteRefHeader = "s,q,zeta_re,zeta_im,rho,u,mag,err,bound,draw,class"

// readFiniteRef parses the table; errors name the file and line.
func readFiniteRef(path string) ([]finiteRefRow, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var rows []finiteRefRow
	sc := bufio.NewScanner(f)
	n, header := 0, false
	for sc.Scan() {
		n++
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if !header {
			if line != finiteRefHeader {
				return nil, fmt.Errorf("%s:%d: header %q, want %q", path, n, line, finiteRefHeader)
			}
			header = true
			continue
		}
		fs := strings.Split(line, ",")
		if len(fs) != 11 {
			return nil, fmt.Errorf("%s:%d: %d fields, want 11", path, n, len(fs))
		}
		var v [9]float64
		for i := 0; i < 9; i++ {
			x, err := strconv.ParseFloat(fs[i], 64)
			if err != nil {
				return nil, fmt.Errorf("%s:%d: field %d (%s): %v", path, n, i+1, strings.Split(finiteRefHeader, ",")[i], err)
			}
			v[i] = x
		}
		r := finiteRefRow{s: v[0], q: v[1], zeta: complex(v[2], v[3]), rho: v[4], u: v[5], mag: v[6], err: v[7], bound: v[8], draw: fs[9], class: fs[10], line: n}
		if !(r.s > 0 && r.q > 0 && r.rho > 0 && r.u >= 0 && r.u <= 1 && r.mag >= 1 && r.err >= 0) {
			return nil, fmt.Errorf("%s:%d: values out of range (s, q, rho > 0, u in [0, 1], mag >= 1, err >= 0): %q", path, n, line)
		}
		rows = append(rows, r)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if !header {
		return nil, fmt.Errorf("%s: no header line", path)
	}
	return rows, nil
}

// finiteRefGeom holds per-lens geometry for the classification of points.
type finiteRefGeom struct {
	caus, cusps []complex128
	lenses      [2]float64
}

func newFiniteRefGeom(b Binary) finiteRefGeom {
	const n = 7200
	crit, caus := fsCriticalPoints(b, n)
	z1, z2, _, _ := b.Lenses()
	return finiteRefGeom{caus: caus, cusps: fsCusps(crit, caus, n), lenses: [2]float64{z1, z2}}
}

// classify labels a disk by what it holds, first match wins: "lens-in-disk"
// (a lens position inside the disk), "cusp" (a cusp within 2ρ of the centre),
// "caustic-crossing" (the caustic enters the disk), "fold" (the caustic
// within 2ρ), "near" (otherwise). Distances are to the caustic sampled at
// 7200 angles of the critical-curve quartic.
func (g *finiteRefGeom) classify(zeta complex128, rho float64) string {
	for _, z := range g.lenses {
		if fsAbs(zeta-complex(z, 0)) <= rho {
			return "lens-in-disk"
		}
	}
	for _, c := range g.cusps {
		if fsAbs(zeta-c) <= 2*rho {
			return "cusp"
		}
	}
	d := math.Inf(1)
	for _, c := range g.caus {
		d = math.Min(d, fsAbs(zeta-c))
	}
	switch {
	case d <= rho:
		return "caustic-crossing"
	case d <= 2*rho:
		return "fold"
	}
	return "near"
}

// finiteRefPoints is the point set of the table: fsRefSet with 25 points per
// configuration (2000) for the uniform disk and 5 per configuration (400,
// another seed) for the limb-darkened one; then, for the method switch,
// fsSwitchSet (3ρ–20ρ from the caustic) with 5 uniform and 3 limb-darkened
// points per configuration (400 + 240).
func finiteRefPoints() (pts []fsRefPoint, ld []float64) {
	for _, p := range fsRefSet(25, 1) {
		pts, ld = append(pts, p), append(ld, 0)
	}
	for _, p := range fsRefSet(5, 2) {
		pts, ld = append(pts, p), append(ld, finiteRefLD)
	}
	for _, p := range fsSwitchSet(5, 3) {
		pts, ld = append(pts, p), append(ld, 0)
	}
	for _, p := range fsSwitchSet(3, 4) {
		pts, ld = append(pts, p), append(ld, finiteRefLD)
	}
	return pts, ld
}

func TestWriteFiniteReference(t *testing.T) {
	if !*updateFiniteRef {
		t.Skip("regenerates the reference table: run with -args -update-finite-ref")
	}
	pts, lds := finiteRefPoints()
	geom := map[Binary]*finiteRefGeom{}
	for _, p := range pts {
		b := Binary{S: p.s, Q: p.q}
		if geom[b] == nil {
			g := newFiniteRefGeom(b)
			geom[b] = &g
		}
	}
	start := time.Now()
	rows, cpu := imagePlaneRows(pts, lds, finiteRefAcc,
		func(p fsRefPoint) string { return geom[Binary{S: p.s, Q: p.q}].classify(p.zeta, p.rho) },
		func(done int) {
			if done%100 == 0 {
				t.Logf("%d/%d rows, %v", done, len(pts), time.Since(start).Round(time.Second))
			}
		})

	var sb strings.Builder
	fmt.Fprintf(&sb, "# Finite-source binary-lens reference magnifications (lens frame of the package doc).\n")
	fmt.Fprintf(&sb, "# Generated by: %s\n", finiteRefCmd)
	fmt.Fprintf(&sb, "# Method: image-plane brute force (inverse ray shooting on an adaptive quadtree with rigorous\n")
	fmt.Fprintf(&sb, "# bounds, lens/finite_imageplane_test.go), converged to %g relative by halving the leaf size.\n", finiteRefAcc)
	fmt.Fprintf(&sb, "# Points (lens/finite_ref_test.go), rho x q x s grid of issue 3: fsRefSet on and near the caustic,\n")
	fmt.Fprintf(&sb, "# u = 0 seed 1 (25 per configuration), u = %g seed 2 (5 per configuration); fsSwitchSet 3-20 rho\n", finiteRefLD)
	fmt.Fprintf(&sb, "# from the caustic, u = 0 seed 3 (5 per configuration), u = %g seed 4 (3 per configuration).\n", finiteRefLD)
	fmt.Fprintf(&sb, "# Columns: s, q; source centre zeta; source radius rho; linear limb-darkening u; reference\n")
	fmt.Fprintf(&sb, "# magnification mag; err = its error estimate (uniform: max of the rigorous bound and the change\n")
	fmt.Fprintf(&sb, "# under halving the leaf size; limb-darkened: that change); bound = the rigorous error bound\n")
	fmt.Fprintf(&sb, "# (uniform only, NaN otherwise); draw = how the point was drawn; class = what the disk holds\n")
	fmt.Fprintf(&sb, "# (lens-in-disk, cusp within 2 rho, caustic-crossing, fold within 2 rho, near; see classify).\n")
	writeRefRows(&sb, rows)
	if err := os.MkdirAll(filepath.Dir(finiteRefPath), 0o755); err != nil {
		t.Fatal(err)
	}
	tmp := finiteRefPath + ".tmp"
	if err := os.WriteFile(tmp, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(tmp, finiteRefPath); err != nil {
		t.Fatal(err)
	}
	var tot time.Duration
	ms := make([]float64, len(cpu))
	for i, c := range cpu {
		tot += c
		ms[i] = float64(c) / 1e6
	}
	t.Logf("wrote %d rows in %v (brute force %v summed over workers; per point median %.1f ms, p90 %.1f ms, max %.0f ms)",
		len(rows), time.Since(start).Round(time.Second), tot.Round(time.Second), fsQuantile(ms, 0.5), fsQuantile(ms, 0.9), fsQuantile(ms, 1))
}

// finiteRefStats accumulates the errors of FiniteMag against the table.
type finiteRefStats struct {
	n, out, out3 int
	worst        float64
}

func (s *finiteRefStats) add(e, tol float64) {
	s.n++
	if e > tol {
		s.out++
	}
	if e > 3*tol {
		s.out3++
	}
	s.worst = math.Max(s.worst, e)
}

// TestFiniteReferenceTable is the accuracy check of issue 3 against the
// brute-force table: FiniteMag at tolerance 1e-3 must be within tolerance at
// ≥ 99.5 % of the points (of each set: uniform and limb-darkened, on or near
// the caustic and 3–20ρ off it) and within 3× tolerance at all; where it
// picks an approximation (point source, quadrupole, hexadecapole) it must be
// within tolerance at every point.
func TestFiniteReferenceTable(t *testing.T) {
	const tol = 1e-3
	rows, err := readFiniteRef(finiteRefPath)
	if err != nil {
		t.Fatal(err)
	}
	nU := 0
	for _, r := range rows {
		if r.u == 0 && r.draw != "off-caustic" {
			nU++
		}
		if !(r.err <= 1e-4*r.mag) {
			t.Errorf("%s:%d: reference error %.2g is not 10× below the tolerance", finiteRefPath, r.line, r.err/r.mag)
		}
	}
	if nU < 2000 {
		t.Errorf("%d uniform-disk rows on or near caustics, the check asks for ≥ 2000", nU)
	}
	solvers := map[Binary]*Solver{}
	byClass := map[string]*finiteRefStats{}
	var byMethod [Contour + 1]finiteRefStats
	// Sets: uniform / limb-darkened × on or near the caustic / off it (the
	// switch set).
	setNames := [4]string{"uniform, caustic", "LD u=0.6, caustic", "uniform, 3-20ρ off", "LD u=0.6, 3-20ρ off"}
	var bySet [4]finiteRefStats
	var fails [4][]string // per set: rows beyond 3·tol or approximations beyond tol
	var elapsed time.Duration
	for _, r := range rows {
		b := Binary{S: r.s, Q: r.q}
		s := solvers[b]
		if s == nil {
			s = NewSolver(b)
			solvers[b] = s
		}
		t0 := time.Now()
		f, err := s.FiniteMag(r.zeta, r.rho, r.u, tol)
		elapsed += time.Since(t0)
		if err != nil {
			t.Errorf("%s:%d: %v", finiteRefPath, r.line, err)
			continue
		}
		e := math.Abs(f.Mag/r.mag - 1)
		set := 0
		if r.u != 0 {
			set = 1
		}
		if r.draw == "off-caustic" {
			set += 2
		}
		bySet[set].add(e, tol)
		byMethod[f.Method].add(e, tol)
		key := r.class
		if r.u != 0 {
			key += " (LD)"
		}
		if byClass[key] == nil {
			byClass[key] = &finiteRefStats{}
		}
		byClass[key].add(e, tol)
		if e > tol {
			msg := fmt.Sprintf("%s:%d: %s s=%g q=%g ζ=%v ρ=%g u=%g: %v %.9g (est %.2g, %d samples), reference %.9g ± %.1g, rel err %.3g",
				finiteRefPath, r.line, r.class, r.s, r.q, r.zeta, r.rho, r.u, f.Method, f.Mag, f.Err/f.Mag, f.Samples, r.mag, r.err/r.mag, e)
			switch {
			case e > 3*tol:
				fails[set] = append(fails[set], "beyond 3·tol: "+msg)
			case f.Method != Contour:
				fails[set] = append(fails[set], "approximation outside tol: "+msg)
			default:
				t.Log("beyond tol: " + msg)
			}
		}
	}
	for i, name := range setNames {
		st := bySet[i]
		if st.n == 0 {
			t.Errorf("no %s rows", name)
			continue
		}
		frac := 1 - float64(st.out)/float64(st.n)
		t.Logf("%-20s %4d points: %.2f%% within tol, %d beyond tol, %d beyond 3·tol, worst err/tol %.3g",
			name, st.n, 100*frac, st.out, st.out3, st.worst/tol)
		if frac < 0.995 {
			fails[i] = append(fails[i], fmt.Sprintf("%s: %.2f%% of points within tol, want ≥ 99.5%%", name, 100*frac))
		}
		for _, f := range fails[i] {
			t.Error(f)
		}
	}
	keys := make([]string, 0, len(byClass))
	for k := range byClass {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		st := byClass[k]
		t.Logf("  class %-23s %4d points, %d beyond tol, worst err/tol %.3g", k, st.n, st.out, st.worst/tol)
	}
	for m := PointSource; m <= Contour; m++ {
		st := byMethod[m]
		t.Logf("  method %-13v %4d points, %d beyond tol, worst err/tol %.3g", m, st.n, st.out, st.worst/tol)
	}
	t.Logf("FiniteMag: %v for %d points, %.3g ms per point", elapsed.Round(time.Millisecond), len(rows), float64(elapsed)/1e6/float64(len(rows)))
}

// TestFiniteReferenceFresh recomputes a few rows of the table with the brute
// force (the first of each class, uniform and limb-darkened) to show that
// the table matches the present generator: each must agree within the two
// error estimates.
func TestFiniteReferenceFresh(t *testing.T) {
	rows, err := readFiniteRef(finiteRefPath)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	var pick []finiteRefRow
	for _, r := range rows {
		key := fmt.Sprintf("%s/%g", r.class, r.u)
		if seen[key] {
			continue
		}
		seen[key] = true
		pick = append(pick, r)
	}
	classes := map[string]bool{}
	for _, r := range pick {
		classes[r.class] = true
	}
	for _, c := range []string{"lens-in-disk", "cusp", "caustic-crossing"} {
		if !classes[c] {
			t.Errorf("no %s row among the recomputed ones", c)
		}
	}
	for _, r := range pick {
		t0 := time.Now()
		m, e, _ := imagePlaneMag(binaryMasses(Binary{S: r.s, Q: r.q}), r.zeta, r.rho, r.u, finiteRefAcc)
		d := math.Abs(m - r.mag)
		t.Logf("%s:%d %-16s u=%g ρ=%g: table %.10g, now %.10g (diff %.2g, estimates %.2g + %.2g) %v",
			finiteRefPath, r.line, r.class, r.u, r.rho, r.mag, m, d/r.mag, r.err/r.mag, e/m, time.Since(t0).Round(time.Millisecond))
		if d > e+r.err {
			t.Errorf("%s:%d: table %.10g, brute force now %.10g: the table is stale (regenerate: %s)", finiteRefPath, r.line, r.mag, m, finiteRefCmd)
		}
	}
}

// imagePlaneRows computes the image-plane brute force of every point to
// relative accuracy acc on two workers; class names what each disk holds,
// progress (if not nil) hears the count of finished rows. cpu[i] is the time
// row i took.
func imagePlaneRows(pts []fsRefPoint, lds []float64, acc float64, class func(fsRefPoint) string, progress func(done int)) (rows []finiteRefRow, cpu []time.Duration) {
	rows = make([]finiteRefRow, len(pts))
	cpu = make([]time.Duration, len(pts))
	jobs := make(chan int)
	var wg sync.WaitGroup
	var mu sync.Mutex
	done := 0
	for w := 0; w < 2; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range jobs {
				p := pts[i]
				t0 := time.Now()
				m, e, runs := imagePlaneMag(binaryMasses(Binary{S: p.s, Q: p.q}), p.zeta, p.rho, lds[i], acc)
				cpu[i] = time.Since(t0)
				rows[i] = finiteRefRow{s: p.s, q: p.q, zeta: p.zeta, rho: p.rho, u: lds[i], mag: m, err: e,
					bound: runs[len(runs)-1].Bound, draw: p.kind, class: class(p)}
				if progress != nil {
					mu.Lock()
					done++
					progress(done)
					mu.Unlock()
				}
			}
		}()
	}
	for i := range pts {
		jobs <- i
	}
	close(jobs)
	wg.Wait()
	return rows, cpu
}

// writeRefRows writes the header line and the rows in the column format of
// reference.csv (read back by the table loader).
func writeRefRows(sb *strings.Builder, rows []finiteRefRow) {
	sb.WriteString(finiteRefHeader + "\n")
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	e := func(x float64) string { return strconv.FormatFloat(x, 'g', 3, 64) }
	for _, r := range rows {
		fmt.Fprintf(sb, "%s,%s,%s,%s,%s,%s,%s,%s,%s,%s,%s\n", g(r.s), g(r.q), g(real(r.zeta)), g(imag(r.zeta)), g(r.rho), g(r.u),
			strconv.FormatFloat(r.mag, 'g', 12, 64), e(r.err), e(r.bound), strings.ReplaceAll(r.draw, " ", "-"), r.class)
	}
}
