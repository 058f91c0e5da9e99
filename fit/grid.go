package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"lensbook/lens"
)

// GridSettings configures the binary-lens grid search over (log10 s, log10 q).
// The zero value is the default grid: log s ∈ [−1, 1] and log q ∈ [−6, 0] with
// 31×31 nodes, 8 α seeds per node, the best of them polished by
// Levenberg–Marquardt with at most 30 χ² evaluations, point source, binned data.
type GridSettings struct {
	// LogSMin, LogSMax bound log10 s; both 0 means −1, 1.
	LogSMin float64 `json:"logSMin"`
	LogSMax float64 `json:"logSMax"`
	// NS is the number of s nodes (inclusive of both ends); 0 means 31.
	NS int `json:"ns"`
	// LogQMin, LogQMax bound log10 q; both 0 means −6, 0.
	LogQMin float64 `json:"logQMin"`
	LogQMax float64 `json:"logQMax"`
	// NQ is the number of q nodes; 0 means 31.
	NQ int `json:"nq"`
	// Alphas is the number of α seeds per node; 0 means 8. The seeds are
	// α_k = 2π(k + φ)/Alphas with the phase φ ∈ [0, 1) drawn from Seed.
	Alphas int `json:"alphas"`
	// Seed fixes φ (PCG source seeded with (Seed, 0x6c656e73)); the same seed
	// gives the same grid bit for bit on one platform.
	Seed uint64 `json:"seed"`
	// Rho is the source size held fixed during the grid; 0 means the start's ρ
	// (a point source when the start has none). With a caustic crossing in the
	// data (GridResult.Crossing) the grid uses a point source instead and the
	// refinement fits ρ.
	Rho float64 `json:"rho"`
	// FreeRho lets ρ vary at each node (only when the node's ρ > 0).
	FreeRho bool `json:"freeRho"`
	// Method is the node optimiser; 0 (MethodDefault) means Levenberg–Marquardt,
	// which recovered the planetary test events where Nelder–Mead with the same
	// budget did not (measured, see the package README).
	Method Method `json:"method"`
	// Polish is how many of the best α seeds (after one χ² evaluation each at
	// the start values) are optimised; 0 means 1.
	Polish int `json:"polish"`
	// MaxEval caps χ² evaluations per polished seed; 0 means 30.
	MaxEval int `json:"maxEval"`
	// Tol is the χ² change counted as converged at a node; 0 means 0.05.
	Tol float64 `json:"tol"`
	// AnomalyT (full JD), when > 0, is the time at which the caustic-centre
	// seeds put the source on each caustic of a node. 0 means the midpoint of
	// the anomaly window of the start's residuals (FindAnomaly) when it lies
	// more than 0.1 tE from t0 (an anomaly at the peak comes from the central
	// caustic, which the α seeds cover); no such seeds when there is none.
	AnomalyT float64 `json:"anomalyT"`
	// NoCrossing turns off the caustic-crossing seeds and the point-source
	// grid around the jumps (see RunGridChunk) even when the data show a
	// crossing.
	NoCrossing bool `json:"noCrossing"`
	// NoBin uses every data point in the grid. By default runs of points where
	// the start model is smooth and fits within 3σ are merged by inverse-variance
	// binning for the grid stage (see BinDays, BinTol); refinement always uses
	// every point.
	NoBin bool `json:"noBin"`
	// BinDays is the longest time span of a bin (days); 0 means 0.25.
	BinDays float64 `json:"binDays"`
	// BinTol is the largest relative change of the start model's magnification
	// across a bin; 0 means 0.01.
	BinTol float64 `json:"binTol"`
}

// withDefaults returns s with zero fields replaced by their defaults.
func (s GridSettings) withDefaults() GridSettings {
	if s.LogSMin == 0 && s.LogSMax == 0 {
		s.LogSMin, s.LogSMax = -1, 1
	}
	if s.LogQMin == 0 && s.LogQMax == 0 {
		s.LogQMin, s.LogQMax = -6, 0
	}
	if s.NS == 0 {
		s.NS = 31
	}
	if s.NQ == 0 {
		s.NQ = 31
	}
	if s.Alphas == 0 {
		s.Alphas = 8
	}
	if s.Method == MethodDefault {
		s.Method = LevenbergMarquardt
	}
	if s.Polish == 0 {
		s.Polish = 1
	}
	if s.MaxEval == 0 {
		s.MaxEval = 30
	}
	if s.Tol == 0 {
		s.Tol = 0.05
	}
	if s.BinDays == 0 {
		s.BinDays = 0.25
	}
	if s.BinTol == 0 {
		s.BinTol = 0.01
	}
	return s
}

func (s GridSettings) validate() error {
	switch {
	case s.NS < 1 || s.NQ < 1 || s.Alphas < 1 || s.MaxEval < 1 || s.Polish < 0:
		return fmt.Errorf("fit: grid sizes ns=%d nq=%d alphas=%d polish=%d maxEval=%d must be >= 1", s.NS, s.NQ, s.Alphas, s.Polish, s.MaxEval)
	case !(s.LogSMin <= s.LogSMax) || !(s.LogQMin <= s.LogQMax):
		return fmt.Errorf("fit: grid ranges log s [%v, %v], log q [%v, %v] are reversed", s.LogSMin, s.LogSMax, s.LogQMin, s.LogQMax)
	case s.LogQMax > 0:
		return fmt.Errorf("fit: grid log q max %v > 0: q = m2/m1 ≤ 1 by convention", s.LogQMax)
	case !(s.BinDays > 0) || !(s.BinTol > 0):
		return fmt.Errorf("fit: grid binning span %v d and tolerance %v must be > 0", s.BinDays, s.BinTol)
	case s.Rho < 0 || s.Rho >= 1:
		return fmt.Errorf("fit: grid rho %v outside [0, 1)", s.Rho)
	}
	return nil
}

func lin(a, b float64, i, n int) float64 {
	if n == 1 {
		return 0.5 * (a + b)
	}
	return a + (b-a)*float64(i)/float64(n-1)
}

// AlphaSeeds returns the α seeds (radians) of the settings.
func (s GridSettings) AlphaSeeds() []float64 {
	s = s.withDefaults()
	r := rand.New(rand.NewPCG(s.Seed, 0x6c656e73))
	phi := r.Float64()
	out := make([]float64, s.Alphas)
	for k := range out {
		out[k] = 2 * math.Pi * (float64(k) + phi) / float64(s.Alphas)
	}
	return out
}

// GridNode is the result at one (s, q) node.
type GridNode struct {
	Index int     `json:"index"` // IQ·NS + IS
	IS    int     `json:"is"`
	IQ    int     `json:"iq"`
	LogS  float64 `json:"logS"`
	LogQ  float64 `json:"logQ"`
	Done  bool    `json:"done"` // computed (false: other chunk, cancelled, or failed)
	// Chi2 is the best χ² over the α seeds (0 when not Done).
	Chi2   float64     `json:"chi2"`
	Params lens.Params `json:"params"` // best model at this node
	Evals  int         `json:"evals"`
	Err    string      `json:"err,omitempty"` // why the node failed, if it did
}

// GridResult holds a grid, or the part of it one chunk computed.
type GridResult struct {
	Settings GridSettings `json:"settings"` // with defaults filled in
	Start    lens.Params  `json:"start"`    // seed of t0, u0, tE (and ρ)
	Chunks   []int        `json:"chunks"`   // chunk indices merged in (of NChunks)
	NChunks  int          `json:"nChunks"`
	Nodes    []GridNode   `json:"nodes"` // every node of the grid, in Index order
	Status   Status       `json:"status"`
	Evals    int          `json:"evals"`
	// Points is the number of (binned; with a Crossing, unmasked) points the
	// grid χ² values refer to; they are comparable with each other, not with
	// χ² on the full data.
	Points int `json:"points"`
	// AnomalyT is the anomaly time the caustic-centre seeds aimed at (full
	// JD; 0: none, the anomaly was at the peak or not found).
	AnomalyT float64 `json:"anomalyT,omitempty"`
	// Crossing is the caustic crossing read from the data, nil when none: the
	// grid then used a point source without the points in Crossing.Masked.
	Crossing *Crossing `json:"crossing,omitempty"`
}

// NewGrid returns the empty grid of the settings around start.
func NewGrid(start lens.Params, set GridSettings) (*GridResult, error) {
	set = set.withDefaults()
	if err := set.validate(); err != nil {
		return nil, err
	}
	if !(start.TE > 0) {
		return nil, fmt.Errorf("fit: grid start tE = %v must be > 0 (use a single-lens fit)", start.TE)
	}
	g := &GridResult{Settings: set, Start: start, Nodes: make([]GridNode, set.NS*set.NQ)}
	for iq := 0; iq < set.NQ; iq++ {
		for is := 0; is < set.NS; is++ {
			k := iq*set.NS + is
			g.Nodes[k] = GridNode{Index: k, IS: is, IQ: iq,
				LogS: lin(set.LogSMin, set.LogSMax, is, set.NS), LogQ: lin(set.LogQMin, set.LogQMax, iq, set.NQ)}
		}
	}
	return g, nil
}

// ChunkNodes returns the node indices of chunk c of n: every n-th node starting
// at c, so that chunks of a grid ordered by q get similar work.
func ChunkNodes(total, c, n int) []int {
	var out []int
	for k := c; k < total; k += n {
		out = append(out, k)
	}
	return out
}

// RunGridChunk computes chunk (0-based) of nChunks of the grid of set around
// start (t0, u0, tE and ρ seed the nodes; a single-lens fit's best parameters).
//
// Before the nodes, the residuals of start are read once (gridPlan): the
// anomaly window (FindAnomaly) and the steps of the residuals (FindJumps). At
// each node the seeds are
//   - the α seeds of the settings at the start's t0, u0, tE (with the
//     central-caustic reference point these stay close to the single-lens
//     values for planetary perturbations);
//   - when the anomaly lies away from the peak (or AnomalyT is set), for each
//     caustic of the node (lens.Caustics) the start trajectory turned, and
//     turned with tE stretched, so that the source is at that caustic's centre
//     at the anomaly time (throughPoint);
//   - when the residuals show a caustic crossing (a rise and a later fall, see
//     Crossing), for each caustic of the node the chords between pairs of
//     points of it crossed at the observed entry and exit times (Cassan 2008).
//
// Every seed is evaluated once; the best Polish of the first two kinds are
// optimised over t0, u0, tE, α (and ρ with FreeRho) with s and q fixed, the
// best Polish chords over their entry and exit points and times; the node keeps
// the lowest χ². With a crossing the grid uses a point source and leaves out
// the data around the two jumps (Crossing.Masked): a point source reproduces a
// finite one a few source radii from the caustic, the caustic-crossing
// coordinates keep the model's jumps at the observed times, and a point
// source costs about 1% of a finite one near caustics (measured, see the
// package README); the refinement then fits ρ on every point.
//
// A node's result depends only on the event, start, settings and the node
// itself, so merging the chunks with MergeGrid gives exactly the grid of a
// single chunk. progress, if not nil, is called after each node (from the
// calling goroutine). A cancelled ctx returns the nodes finished so far with
// Status Cancelled.
func RunGridChunk(ctx context.Context, ev *Event, start lens.Params, set GridSettings, chunk, nChunks int, progress func(GridNode)) (*GridResult, error) {
	if nChunks < 1 || chunk < 0 || chunk >= nChunks {
		return nil, fmt.Errorf("fit: chunk %d of %d out of range", chunk, nChunks)
	}
	g, err := NewGrid(start, set)
	if err != nil {
		return nil, err
	}
	g.Chunks, g.NChunks = []int{chunk}, nChunks
	set = g.Settings
	plan, err := newGridPlan(ev, start, set)
	if err != nil {
		return nil, err
	}
	g.Points = plan.l.N()
	g.AnomalyT = plan.ta
	g.Crossing = plan.cross
	g.Status = Converged
	for _, k := range ChunkNodes(len(g.Nodes), chunk, nChunks) {
		if ctx.Err() != nil {
			g.Status = Cancelled
			return g, nil
		}
		nd := &g.Nodes[k]
		if cancelled := plan.node(ctx, nd); cancelled {
			nd.Params, nd.Evals, nd.Err = lens.Params{}, 0, ""
			g.Status = Cancelled
			return g, nil
		}
		g.Evals += nd.Evals
		if progress != nil {
			progress(*nd)
		}
	}
	return g, nil
}

// RunGrid computes the whole grid in one chunk.
func RunGrid(ctx context.Context, ev *Event, start lens.Params, set GridSettings, progress func(GridNode)) (*GridResult, error) {
	return RunGridChunk(ctx, ev, start, set, 0, 1, progress)
}

// ErrGridMismatch reports chunks of different grids given to MergeGrid.
var ErrGridMismatch = errors.New("fit: grid chunks come from different grids")

// MergeGrid combines chunk results of one grid (same settings, start and
// chunk count) into one result. Nodes done in any part are taken from it; the
// merged Status is Converged only when every chunk is present and converged.
func MergeGrid(parts ...*GridResult) (*GridResult, error) {
	if len(parts) == 0 {
		return nil, fmt.Errorf("fit: MergeGrid needs at least one part")
	}
	p0 := parts[0]
	out := &GridResult{Settings: p0.Settings, Start: p0.Start, NChunks: p0.NChunks,
		Nodes: append([]GridNode(nil), p0.Nodes...), Status: Converged}
	seen := map[int]bool{}
	for _, p := range parts {
		if p.Settings != p0.Settings || p.Start != p0.Start || p.NChunks != p0.NChunks || len(p.Nodes) != len(p0.Nodes) {
			return nil, ErrGridMismatch
		}
		for _, c := range p.Chunks {
			if seen[c] {
				return nil, fmt.Errorf("fit: MergeGrid: chunk %d given twice", c)
			}
			seen[c] = true
			out.Chunks = append(out.Chunks, c)
		}
		out.Evals += p.Evals
		out.Points = p.Points
		// every chunk reads the same anomaly from the same data; a part
		// rebuilt from a lost worker's progress messages has none
		if out.Crossing == nil {
			out.Crossing = p.Crossing
		}
		if out.AnomalyT == 0 {
			out.AnomalyT = p.AnomalyT
		}
		if p.Status != Converged {
			out.Status = p.Status
		}
		for k, nd := range p.Nodes {
			if nd.Done || nd.Err != "" {
				out.Nodes[k] = nd
			}
		}
	}
	sort.Ints(out.Chunks)
	if len(out.Chunks) != out.NChunks && out.Status == Converged {
		out.Status = NotRun
	}
	return out, nil
}

// DoneNodes counts the nodes computed so far.
func (g *GridResult) DoneNodes() int {
	n := 0
	for _, nd := range g.Nodes {
		if nd.Done {
			n++
		}
	}
	return n
}

// Map returns the χ² map as Map()[iq][is], NaN where a node is not done.
func (g *GridResult) Map() [][]float64 {
	ns, nq := g.Settings.NS, g.Settings.NQ
	m := make([][]float64, nq)
	for iq := range m {
		m[iq] = make([]float64, ns)
		for is := range m[iq] {
			nd := g.Nodes[iq*ns+is]
			if nd.Done {
				m[iq][is] = nd.Chi2
			} else {
				m[iq][is] = math.NaN()
			}
		}
	}
	return m
}

// Minima returns up to n distinct local minima of the χ² map (nodes whose χ² is
// not above any done neighbour's among the 8 around them; ties go to the lower
// index), best first. n ≤ 0 means all.
func (g *GridResult) Minima(n int) []GridNode {
	ns, nq := g.Settings.NS, g.Settings.NQ
	var out []GridNode
	for _, nd := range g.Nodes {
		if !nd.Done {
			continue
		}
		isMin := true
		for dq := -1; dq <= 1 && isMin; dq++ {
			for ds := -1; ds <= 1; ds++ {
				if dq == 0 && ds == 0 {
					continue
				}
				iq, is := nd.IQ+dq, nd.IS+ds
				if iq < 0 || iq >= nq || is < 0 || is >= ns {
					continue
				}
				o := g.Nodes[iq*ns+is]
				if !o.Done {
					continue
				}
				if o.Chi2 < nd.Chi2 || (o.Chi2 == nd.Chi2 && o.Index < nd.Index) {
					isMin = false
					break
				}
			}
		}
		if isMin {
			out = append(out, nd)
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].Chi2 < out[j].Chi2 })
	if n > 0 && len(out) > n {
		out = out[:n]
	}
	return out
}
