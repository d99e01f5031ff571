package change

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
)

// normPair builds a sample of n pixels of p bands whose truth is known by
// construction: ref = v + e1 and date = offset + gain·(v + e2), with v a
// correlated signal (a shared brightness and band-specific terms), e1, e2
// independent noise of standard deviation noise in ref's units, and a
// changed share of the pixels whose band 3 rises by 30 and band 2 falls by
// 15 before scaling. The exact normalisation of date onto ref is gain 1/g
// and offset −o/g.
func normPair(n, p int, gains, offsets []float64, noise, changed float64, seed uint64) (ref, date []float64) {
	rng := rand.New(rand.NewPCG(seed, 7))
	ref, date = make([]float64, n*p), make([]float64, n*p)
	for i := range n {
		bright := 40 + 30*rng.Float64()
		moved := rng.Float64() < changed
		for b := range p {
			v := bright*(1+0.3*float64(b)) + 10*rng.NormFloat64()
			ref[i*p+b] = v + noise*rng.NormFloat64()
			w := v + noise*rng.NormFloat64()
			if moved && b == 3 {
				w += 30
			}
			if moved && b == 2 {
				w -= 15
			}
			date[i*p+b] = offsets[b] + gains[b]*w
		}
	}
	return ref, date
}

// TestFitNormalizationRecoversKnownGains: the gains and offsets of a pair
// on two radiometric scales (gains 20 to 60, as between two sensors'
// digital numbers) are recovered within 0.5% (gain) and 0.5% of the band's
// range (offset), known by construction (normPair), with and without
// changed pixels. The first stage alone is allowed to be off: the check is
// on the settled refinement.
func TestFitNormalizationRecoversKnownGains(t *testing.T) {
	gains := []float64{20, 35, 60, 25, 45, 30}
	offsets := []float64{100, -50, 300, 10, 0, 200}
	for _, tc := range []struct {
		name    string
		changed float64
		noise   float64
	}{
		{"no change", 0, 0.5},
		{"5% changed", 0.05, 0.5},
		{"noisier", 0.05, 2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := len(gains)
			ref, date := normPair(20_000, p, gains, offsets, tc.noise, tc.changed, 3)
			fit, err := FitNormalization(ref, date, p)
			if err != nil {
				t.Fatal(err)
			}
			if !fit.Settled {
				t.Errorf("not settled after %d rounds", fit.Rounds)
			}
			for b, f := range fit.Bands {
				want := 1 / gains[b]
				if rel := math.Abs(f.Gain-want) / want; rel > 0.005 {
					t.Errorf("band %d: gain %.6g, want %.6g (%.2f%% off)", b+1, f.Gain, want, 100*rel)
				}
				rangeOf := 100.0 // the signal spans about 100 units of ref
				if d := math.Abs(f.Offset - (-offsets[b] / gains[b])); d > 0.005*rangeOf {
					t.Errorf("band %d: offset %.6g, want %.6g", b+1, f.Offset, -offsets[b]/gains[b])
				}
				if f.Correlation < 0.9 {
					t.Errorf("band %d: correlation %.3f over the stable pixels", b+1, f.Correlation)
				}
			}
		})
	}
}

// TestFitNormalizationWorkers: the fit is the same bit for bit whatever
// the number of goroutines its pieces run on, true by construction (each
// piece is formed as one goroutine forms it), on a sample large enough for
// every stage to be cut into pieces, with changed pixels.
func TestFitNormalizationWorkers(t *testing.T) {
	gains := []float64{20, 35, 60, 25, 45, 30, 50}
	offsets := []float64{100, -50, 300, 10, 0, 200, 20}
	ref, date := normPair(60_000, len(gains), gains, offsets, 0.5, 0.05, 5)
	want, err := fitNormalization(ref, date, len(gains), serial)
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []par{2, 3, 8} {
		got, err := fitNormalization(ref, date, len(gains), w)
		if err != nil || !reflect.DeepEqual(got, want) {
			t.Errorf("%d goroutines: %+v, %v; one: %+v", w, got, err, want)
		}
	}
}

// TestFitNormalizationIdentity: equal dates give gain 1 and offset 0
// exactly (known by construction), so a date compared with itself after
// normalisation differs by nothing.
func TestFitNormalizationIdentity(t *testing.T) {
	ref, _ := normPair(2_000, 4, []float64{1, 1, 1, 1}, []float64{0, 0, 0, 0}, 0.5, 0, 5)
	fit, err := FitNormalization(ref, append([]float64(nil), ref...), 4)
	if err != nil {
		t.Fatal(err)
	}
	for b, f := range fit.Bands {
		if f.Gain != 1 || f.Offset != 0 {
			t.Errorf("band %d: gain %v offset %v, want 1 and 0", b+1, f.Gain, f.Offset)
		}
	}
}

// TestWithinRounding: differences of a float32 rounding pass, one digital
// number or a NaN does not (known by construction).
func TestWithinRounding(t *testing.T) {
	a := []float64{0.1234567, 1000, 0, -3}
	b := make([]float64, len(a))
	for i, v := range a {
		b[i] = float64(float32(v))
	}
	if !WithinRounding(a, b) {
		t.Error("float32 rounding counted as a difference")
	}
	b[1] = 1001
	if WithinRounding(a, b) {
		t.Error("a difference of 1 in 1000 counted as rounding")
	}
	if WithinRounding([]float64{math.NaN()}, []float64{math.NaN()}) {
		t.Error("NaN counted as rounding")
	}
}
