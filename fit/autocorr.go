package fit

import (
	"math"
	"math/bits"

	"gonum.org/v1/gonum/dsp/fourier"
)

// TauEstimate is an integrated autocorrelation time estimated from one or more
// chains of equal length.
type TauEstimate struct {
	// Tau is τ_int = 1 + 2 Σ_{t=1}^{M} ρ(t), in samples of the series; NaN when
	// the series has no variance or fewer than 2 samples.
	Tau float64
	// Window is the summation window M chosen by Sokal's criterion.
	Window int
	// Settled reports whether the criterion M ≥ c·τ(M) was met before the lags ran
	// out; when false τ is a lower bound from a chain too short to measure it.
	Settled bool
	// RelErr is the approximate relative standard error of Tau,
	// √(2(2M+1)/N) with N the total number of samples (Sokal 1997, eq. for the
	// variance of the windowed estimator; Madras & Sokal 1988, J. Stat. Phys. 50, 109).
	RelErr float64
}

// SokalWindow is the default constant c of Sokal's automatic window M ≥ c·τ(M).
// Sokal (1997) advises c of about 4–6 when the autocorrelation is roughly
// exponential; 5 is the common choice.
const SokalWindow = 5

// IntegratedTime estimates the integrated autocorrelation time of one scalar
// observed along several chains of equal length (for an ensemble sampler: one
// chain per walker). The autocovariance of each chain about its own mean is
// computed by FFT (biased 1/n normalisation), the chains' autocovariances are
// averaged, normalised to ρ(0) = 1, and summed over lags up to the smallest M with
// M ≥ c·τ(M): the windowed estimator with automatic window of Sokal (1997,
// "Monte Carlo Methods in Statistical Mechanics: Foundations and New Algorithms",
// in Functional Integration, NATO ASI Series B 361, 131), used for ensemble
// samplers by Goodman & Weare (2010, Comm. App. Math. Comp. Sci. 5, 65).
// c ≤ 0 means SokalWindow.
//
// It panics if the chains differ in length.
func IntegratedTime(chains [][]float64, c float64) TauEstimate {
	var w acfWork
	return w.integratedTime(chains, c)
}

// acfWork keeps FFT plans and buffers between calls.
type acfWork struct {
	fft   *fourier.FFT
	buf   []float64
	coef  []complex128
	acov  []float64
	seq   []float64
	dm    []float64 // demeaned chains for the direct sum
	nfft  int
	ready int
}

func (w *acfWork) integratedTime(chains [][]float64, c float64) TauEstimate {
	if c <= 0 {
		c = SokalWindow
	}
	nan := TauEstimate{Tau: math.NaN(), RelErr: math.NaN()}
	if len(chains) == 0 {
		return nan
	}
	n := len(chains[0])
	if n < 2 {
		return nan
	}
	nfft := 1
	for nfft < 2*n {
		nfft <<= 1
	}
	if w.nfft != nfft {
		w.fft = fourier.NewFFT(nfft)
		w.buf = make([]float64, nfft)
		w.seq = make([]float64, nfft)
		w.coef = make([]complex128, nfft/2+1)
		w.nfft = nfft
	}
	if cap(w.acov) < n {
		w.acov = make([]float64, n)
	}
	acov := w.acov[:n]
	clear(acov)
	for _, x := range chains {
		if len(x) != n {
			panic("fit: IntegratedTime chains differ in length")
		}
	}
	// Short windows are cheaper summed directly, lag by lag (chains·n per lag)
	// than by FFT (about chains·2n·log2(2n) times a few); try the direct sum up
	// to 8·log2(nfft) lags and fall back to the FFT when the window is longer.
	// Both give the same estimate up to rounding (TestIntegratedTimeMatchesDirect).
	if e, ok := w.directTime(chains, c, 8*bits.Len(uint(nfft))); ok {
		return e
	}
	for _, x := range chains {
		mean := 0.0
		for _, v := range x {
			mean += v
		}
		mean /= float64(n)
		for i, v := range x {
			w.buf[i] = v - mean
		}
		clear(w.buf[n:])
		w.fft.Coefficients(w.coef, w.buf)
		for i, z := range w.coef {
			w.coef[i] = complex(real(z)*real(z)+imag(z)*imag(z), 0)
		}
		w.fft.Sequence(w.seq, w.coef)
		// Sequence is unnormalised (×nfft); the 1/n is the biased autocovariance.
		norm := 1 / (float64(nfft) * float64(n))
		for t := range n {
			acov[t] += w.seq[t] * norm
		}
	}
	if !(acov[0] > 0) {
		return nan
	}
	inv := 1 / acov[0]
	tau := 1.0
	for m := 1; m < n; m++ {
		tau += 2 * acov[m] * inv
		if float64(m) >= c*tau {
			return TauEstimate{Tau: tau, Window: m, Settled: true,
				RelErr: math.Sqrt(2 * float64(2*m+1) / float64(n*len(chains)))}
		}
	}
	m := n - 1
	return TauEstimate{Tau: tau, Window: m, Settled: false,
		RelErr: math.Sqrt(2 * float64(2*m+1) / float64(n*len(chains)))}
}

// directTime is the windowed estimator with the autocovariance summed
// directly, for windows of at most maxLag lags; ok is false when the window
// needs more lags (or the series has no variance, left to the FFT path).
func (w *acfWork) directTime(chains [][]float64, c float64, maxLag int) (TauEstimate, bool) {
	n := len(chains[0])
	maxLag = min(maxLag, n-1)
	if cap(w.dm) < len(chains)*n {
		w.dm = make([]float64, len(chains)*n)
	}
	dm := w.dm[:len(chains)*n]
	for k, x := range chains {
		mean := 0.0
		for _, v := range x {
			mean += v
		}
		mean /= float64(n)
		d := dm[k*n : (k+1)*n]
		for i, v := range x {
			d[i] = v - mean
		}
	}
	lag := func(t int) float64 {
		s := 0.0
		for k := range chains {
			d := dm[k*n : (k+1)*n]
			for i := 0; i+t < n; i++ {
				s += d[i] * d[i+t]
			}
		}
		return s
	}
	c0 := lag(0)
	if !(c0 > 0) {
		return TauEstimate{}, false
	}
	tau := 1.0
	for m := 1; m <= maxLag; m++ {
		tau += 2 * lag(m) / c0
		if float64(m) >= c*tau {
			return TauEstimate{Tau: tau, Window: m, Settled: true,
				RelErr: math.Sqrt(2 * float64(2*m+1) / float64(n*len(chains)))}, true
		}
	}
	return TauEstimate{}, false
}
