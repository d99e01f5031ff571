package change

import "testing"

// BenchmarkFitNormalization fits the normalisation of a pair of 7-band
// dates on change's default sample (DefaultSampleSize pixels), on two
// radiometric scales with 5% of the pixels changed (normPair).
func BenchmarkFitNormalization(b *testing.B) {
	gains := []float64{20, 35, 60, 25, 45, 30, 50}
	offsets := []float64{100, -50, 300, 10, 0, 200, 20}
	ref, date := normPair(DefaultSampleSize, len(gains), gains, offsets, 0.5, 0.05, 3)
	for b.Loop() {
		if _, err := FitNormalization(ref, date, len(gains)); err != nil {
			b.Fatal(err)
		}
	}
}
