package dist

import "testing"

func BenchmarkTToZ(b *testing.B) {
	s := 0.0
	for i := 0; i < b.N; i++ {
		s += TToZ(float64(i%1000)*0.006-1, 150)
	}
	_ = s
}

func BenchmarkTLogSF(b *testing.B) {
	s := 0.0
	for i := 0; i < b.N; i++ {
		s += TLogSF(float64(i%1000)*0.006-1, 150)
	}
	_ = s
}

func BenchmarkZFromLogSF(b *testing.B) {
	s := 0.0
	for i := 0; i < b.N; i++ {
		s += ZFromLogSF(-float64(i%1000)*0.02 - 0.01)
	}
	_ = s
}
