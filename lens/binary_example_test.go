package lens_test

import (
	"fmt"
	"sort"

	"lensbook/lens"
)

// The equal-mass binary with unit separation and the source at the centre of
// mass: five images and A = 13/3 (references.md §3, derived by hand there).
func ExampleSolver_Images() {
	b, err := lens.NewBinary(1, 1)
	if err != nil {
		panic(err)
	}
	sv := lens.NewSolver(b)
	imgs, err := sv.Images(nil, 0)
	if err != nil {
		panic(err)
	}
	a, sum := 0.0, 0.0
	for _, im := range imgs {
		if im.Mag < 0 {
			a -= im.Mag
		} else {
			a += im.Mag
		}
		sum += im.Mag
	}
	fmt.Printf("%d images, A = %.6f, signed sum = %.6f\n", len(imgs), a, sum)
	// Output: 5 images, A = 4.333333, signed sum = 1.000000
}

// A planetary binary's caustics: topology, curves and cusps.
func ExampleBinary_Caustics() {
	for _, s := range []float64{0.8, 1.0, 1.25} {
		b, _ := lens.NewBinary(s, 1e-3)
		var cusps []int
		for _, c := range b.Caustics(0) {
			cusps = append(cusps, len(c.Cusps))
		}
		sort.Ints(cusps)
		fmt.Printf("s = %.2f: %v, cusps per caustic %v\n", s, b.Topology(), cusps)
	}
	sc, sw := lens.TopologyBoundaries(1e-3)
	fmt.Printf("boundaries %.4f %.4f\n", sc, sw)
	// Output:
	// s = 0.80: close, cusps per caustic [3 3 4]
	// s = 1.00: intermediate, cusps per caustic [6]
	// s = 1.25: wide, cusps per caustic [4 4]
	// boundaries 0.9312 1.1531
}
