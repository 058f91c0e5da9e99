package lens

import (
	"math"
	"testing"
)

// binaryRef is references.md §3 (mpmath polyroots at 50 digits, "computed here"
// in that sheet; construction of Witt 1990, A&A 236, 311).
var binaryRef = []struct {
	s, q   float64
	zeta   complex128
	n      int
	a      float64
	signed float64
}{
	{1, 1, complex(0, 0), 5, 4.33333333333333, 1},
	{1, 1, complex(0.1, 0.05), 5, 4.80178571298889, 1},
	{1, 1, complex(0.2, -0.1), 5, 9.02625231201051, 1},
	{1, 1, complex(0, 0.5), 5, 3.41421356237310, 1},
	{1, 1, complex(0.3, 0.3), 3, 1.75862244566877, 1.11237842489},
	{1, 1, complex(1, 0), 3, 1.37445272292766, 1.21621621622},
	{1.2, 0.001, complex(0.3655, 0), 5, 3.71338728510260, 1},
	{1.2, 0.001, complex(0.3655, 0.03), 5, 10.7978021823455, 1},
	{1.2, 0.001, complex(0.3655, 0.1), 3, 2.73861948165383, 0.945793893362},
	{1.2, 0.001, complex(0, 0), 5, 1086.24066840278, 1},
	{1.2, 0.001, complex(-0.0002, 0.0005), 5, 1232.66739485988, 1},
	{1.2, 0.001, complex(0, 0.1), 3, 10.0330181067822, 0.951959939968},
	{1.2, 0.001, complex(0.5, 0.5), 3, 1.66390304594580, 0.998544567587},
	{0.8, 0.001, complex(-0.45, 0), 3, 1.81992106791768, 1.56976032713},
	{0.8, 0.001, complex(-0.45, 0.05), 5, 4.97497357415568, 1},
	{0.8, 0.001, complex(0, 0), 5, 1862.84114583333, 1},
	{0.8, 0.001, complex(0.0012, 0), 5, 627.657892293947, 1},
	{0.8, 0.001, complex(0, 0.1), 3, 10.0364681095884, 0.952751729701},
	{0.8, 0.001, complex(0.5, 0.5), 3, 1.66550112452632, 0.999580292780},
	{2, 0.3, complex(-0.46, 0), 3, 10.0094549979187, 7.89540112983},
	{2, 0.3, complex(-0.41, 0), 3, 122.897627148162, 120.358710073},
	{2, 0.3, complex(-0.16, 0), 5, 12.9679473114931, 1},
	{2, 0.3, complex(1.54, 0), 3, 1.94218269133909, 1.59404323769},
	{2, 0.3, complex(1.44, 0), 3, 2.77832103552091, 2.28943555751},
	{2, 0.3, complex(0, 0.5), 3, 1.53826403364244, 0.824543711487},
}

func TestBinaryReferenceTable(t *testing.T) {
	var buf []Image
	for _, c := range binaryRef {
		b, err := NewBinary(c.s, c.q)
		if err != nil {
			t.Fatal(err)
		}
		for _, warm := range []bool{false, true} {
			sv := NewSolver(b)
			if warm {
				// Arrive from a nearby point so the warm path is exercised.
				if _, err := sv.Mag(c.zeta + complex(1e-3, -2e-3)); err != nil {
					t.Fatal(err)
				}
			}
			imgs, err := sv.Images(buf[:0], c.zeta)
			if err != nil {
				t.Errorf("s=%v q=%v ζ=%v: %v", c.s, c.q, c.zeta, err)
				continue
			}
			a, sum := 0.0, 0.0
			for _, im := range imgs {
				a += math.Abs(im.Mag)
				sum += im.Mag
			}
			if len(imgs) != c.n {
				t.Errorf("s=%v q=%v ζ=%v warm=%v: %d images, want %d", c.s, c.q, c.zeta, warm, len(imgs), c.n)
			}
			// The table quotes 15 significant digits. Double precision limits
			// us to ~1e-13 relative where A ~ 1e3: det J ~ 1/A is a difference
			// 1 − |E|² with absolute round-off of a few 1e-16 (common practice:
			// error propagation), hence the 1e-12 tier.
			if r := math.Abs(a-c.a) / c.a; r > 1e-12 {
				t.Errorf("s=%v q=%v ζ=%v warm=%v: A = %.15g, want %.15g (rel %.2g)", c.s, c.q, c.zeta, warm, a, c.a, r)
			}
			// Signed sums quoted to 12 digits.
			if math.Abs(sum-c.signed) > 1e-11*math.Max(1, math.Abs(c.signed)) && math.Abs(sum-c.signed) > 1e-12*c.a {
				t.Errorf("s=%v q=%v ζ=%v: Σ signed = %.12g, want %.12g", c.s, c.q, c.zeta, sum, c.signed)
			}
		}
	}
}
