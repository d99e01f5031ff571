package series

import (
	"gonum.org/v1/gonum/stat/distuv"
)

// ChisqMedian is the median of the chi-square distribution with k degrees
// of freedom.
func ChisqMedian(k int) float64 { return distuv.ChiSquared{K: float64(k)}.Quantile(0.5) }

// ThresholdSummary is the threshold rule and the Z it resolved to.
type ThresholdSummary struct {
	Rule string  `json:"rule"`
	Z    float64 `json:"z"`
	// Median is the chi-square median of the no-change model with k
	// degrees of freedom: a cut below it flags more than half of the
	// unchanged pixels.
	Median float64 `json:"chisq_median"`
	// Separability is Otsu's eta of the split (otsu only).
	Separability *float64 `json:"otsu_separability,omitempty"`
}
