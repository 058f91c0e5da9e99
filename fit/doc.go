// Package fit is lensbook's inference engine: photometry parsing and validation,
// model parameters and priors, the likelihood with its linear flux solution,
// optimisers, the binary-lens grid search, degenerate partners, the ensemble
// sampler and its diagnostics, derived physical quantities, exports and the
// notebook document. It knows no DOM: the browser worker (package wasm) and the
// Go tests call it the same way.
//
// # Flow
//
// file bytes → Parse (a Dataset per telescope/band, with every problem listed by
// line) → Event (datasets + model settings) → steps (single-lens fit, grid
// search, refine, posterior), each a pure function of its inputs, settings and
// seed → results → exports.
//
// # Conventions
//
// Times are full Julian dates as read; the time system (HJD/BJD, UTC/TDB) is a
// dataset label set by the user, never guessed. Fluxes follow m = ZP − 2.5 log10 F
// with the dataset's zero point ZP. Per dataset the model flux is
// F(t) = fs·A(t) + fb, with fs and fb solved by weighted linear least squares at
// every likelihood call. Angles are radians in Go and degrees in exports.
//
// Errors start with "fit:". Stochastic steps take an explicit seed; there is no
// hidden global random source.
package fit
