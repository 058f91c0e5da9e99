//go:build js && wasm

package deps

import _ "github.com/hajimehoshi/ebiten/v2"
