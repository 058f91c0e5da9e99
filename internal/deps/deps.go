//go:build !js

// Package deps pins the project's third-party modules until real importers exist.
package deps

import (
	_ "github.com/chromedp/chromedp"
	_ "github.com/evanw/esbuild/pkg/api"
	_ "gonum.org/v1/gonum/mat"
)
