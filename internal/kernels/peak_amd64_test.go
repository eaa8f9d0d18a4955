package kernels

import (
	"testing"

	"golang.org/x/sys/cpu"
)

// BenchmarkFMACeiling measures this core's float32 FMA throughput with 10
// independent 8-lane chains (enough to cover the latency of two FMA
// pipes), the ceiling the per-layer figures of BenchmarkLayerThroughput
// (nn) are set against.
func BenchmarkFMACeiling(b *testing.B) {
	if !cpu.X86.HasAVX2 || !cpu.X86.HasFMA {
		b.Skip("no AVX2/FMA")
	}
	const rounds = 1 << 16
	for b.Loop() {
		fmaPeakAVX2(rounds)
	}
	b.ReportMetric(float64(rounds)*160*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
}
