package bands

import "fmt"

// Affine returns the statistics of the pixels of a after the per-band map
// x'_i = gain_i·x_i + offset_i, without a pass over the pixels: the mean
// maps as the values do, the co-moments scale as
//
//	M'_ij = gain_i·gain_j·M_ij
//
// (a shift leaves co-moments unchanged; a scale multiplies them, as for
// variances and covariances in any textbook on moments), and the minimum
// and maximum map to the ends of the mapped interval. The result is an
// ordinary accumulator: mapped values are no longer integer sums. a is not
// changed. It panics if gain and offset do not have one value per band.
func Affine(a *Accumulator, gain, offset []float64) (*Accumulator, error) {
	if len(gain) != a.p || len(offset) != a.p {
		panic(fmt.Sprintf("bands: affine map of %d gains and %d offsets for %d bands", len(gain), len(offset), a.p))
	}
	st := a.State()
	st.Exact = nil
	for i := range st.Mean {
		st.Mean[i] = gain[i]*st.Mean[i] + offset[i]
		for j := range st.CoMoment[i] {
			st.CoMoment[i][j] *= gain[i] * gain[j]
		}
		if st.Count > 0 {
			lo, hi := gain[i]*st.Min[i]+offset[i], gain[i]*st.Max[i]+offset[i]
			st.Min[i], st.Max[i] = min(lo, hi), max(lo, hi)
		}
	}
	return FromState(st)
}
