package lens

import (
	"fmt"
	"runtime"
	"sync"
)

// Rect is an axis-aligned rectangle of the source plane (θE).
type Rect struct{ X0, Y0, X1, Y1 float64 }

// MagMap fills dst (length nx·ny, row-major, row 0 at Y0) with the point-source
// magnification of b at pixel centres over r: pixel (i, j) is at
// x = X0 + (i + ½)(X1 − X0)/nx, y = Y0 + (j + ½)(Y1 − Y0)/ny, stored at
// dst[j·nx + i]. X1 < X0 or Y1 < Y0 mirror the map. It panics if
// len(dst) != nx*ny.
//
// Rows are walked in alternating directions (boustrophedon) so that every
// pixel warm-starts the image solver from its neighbour. Bands of rows run on
// up to GOMAXPROCS goroutines, each with its own Solver (under js/wasm this is
// one thread and costs nothing). A pixel whose images cannot be found (see
// ErrImages; not seen in the tests) is set to 0 and reported in the returned
// error with the count of such pixels; the rest of the map is still filled.
func MagMap(dst []float32, b Binary, r Rect, nx, ny int) error {
	if nx < 0 || ny < 0 {
		return fmt.Errorf("lens: map size %d×%d is negative", nx, ny)
	}
	if len(dst) != nx*ny {
		panic("lens: MagMap dst length differs from nx*ny")
	}
	if err := b.validate(); err != nil {
		return err
	}
	for _, v := range [...]float64{r.X0, r.Y0, r.X1, r.Y1} {
		if !finite(v) {
			return fmt.Errorf("lens: map rectangle %+v is not finite", r)
		}
	}
	if nx == 0 || ny == 0 {
		return nil
	}
	bands := runtime.GOMAXPROCS(0)
	if bands > ny/16 {
		bands = max(1, ny/16)
	}
	var (
		wg       sync.WaitGroup
		mu       sync.Mutex
		failed   int
		firstErr error
	)
	for k := 0; k < bands; k++ {
		j0, j1 := k*ny/bands, (k+1)*ny/bands
		wg.Add(1)
		go func() {
			defer wg.Done()
			n, err := magRows(dst, b, r, nx, ny, j0, j1)
			if n > 0 {
				mu.Lock()
				failed += n
				if firstErr == nil {
					firstErr = err
				}
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	if failed > 0 {
		return fmt.Errorf("lens: magnification map: %d pixels set to 0: %w", failed, firstErr)
	}
	return nil
}

// magRows fills rows [j0, j1) and returns the number of failed pixels and the
// first error.
func magRows(dst []float32, b Binary, r Rect, nx, ny, j0, j1 int) (int, error) {
	sv := NewSolver(b)
	dx := (r.X1 - r.X0) / float64(nx)
	dy := (r.Y1 - r.Y0) / float64(ny)
	failed := 0
	var first error
	for j := j0; j < j1; j++ {
		y := r.Y0 + (float64(j)+0.5)*dy
		row := dst[j*nx : (j+1)*nx]
		for k := 0; k < nx; k++ {
			i := k
			if (j-j0)%2 == 1 {
				i = nx - 1 - k
			}
			x := r.X0 + (float64(i)+0.5)*dx
			a, err := sv.Mag(complex(x, y))
			if err != nil {
				failed++
				if first == nil {
					first = err
				}
				a = 0
			}
			row[i] = float32(a)
		}
	}
	return failed, first
}
