package lens

import (
	"math"
	"testing"
)

func BenchmarkMagMap512(b *testing.B) {
	bl, _ := NewBinary(1.1, 1e-3)
	dst := make([]float32, 512*512)
	r := Rect{-0.6, -0.6, 0.6, 0.6}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if err := MagMap(dst, bl, r, 512, 512); err != nil {
			b.Fatal(err)
		}
	}
}

var _ = math.Abs
