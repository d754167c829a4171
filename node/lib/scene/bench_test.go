package scene

import "testing"

// BenchmarkRead renders one second of the default scene at 48 kHz per iteration, in blocks of
// 10 ms, and reports the cost per sample and the real-time factor.
func BenchmarkRead(b *testing.B) {
	s := mustNew(b, Config{SampleRate: 48000, Seed: 1})
	buf := make([]float32, 480)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for j := 0; j < 100; j++ {
			s.Read(buf)
		}
	}
	perSample := float64(b.Elapsed().Nanoseconds()) / float64(b.N) / 48000
	b.ReportMetric(perSample, "ns/sample")
	b.ReportMetric(1e9/48000/perSample, "x-realtime")
}
