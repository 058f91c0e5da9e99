package lens

import "fmt"

func ExampleSingleMag() {
	// A source of radius ρ = 0.01 θE with linear limb darkening u = 0.6,
	// at several distances from the lens, to the default accuracy 1e-3.
	for _, u := range []float64{0, 0.005, 0.01, 0.03, 0.3} {
		fmt.Printf("u = %-5g A = %.4g (point source %.4g)\n", u, SingleMag(u, 0.01, 0.6, 0), PointMag(u))
	}
	// Output:
	// u = 0     A = 217.8 (point source +Inf)
	// u = 0.005 A = 196.5 (point source 200)
	// u = 0.01  A = 122.6 (point source 100)
	// u = 0.03  A = 33.78 (point source 33.34)
	// u = 0.3   A = 3.445 (point source 3.445)
}

func ExamplePointImages() {
	yPlus, yMinus, muPlus, muMinus := PointImages(1)
	fmt.Printf("images at %.4f and %.4f θE, magnifications %+.4f and %+.4f\n", yPlus, yMinus, muPlus, muMinus)
	// Output:
	// images at 1.6180 and -0.6180 θE, magnifications +1.1708 and -0.1708
}
