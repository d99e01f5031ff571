package change

// Confusion is the confusion matrix of a change map against reference data,
// counted over the pixels valid in both: mapped changed or not against
// changed or not in the reference. Each worker can count its own tiles and
// the results be merged.
type Confusion struct {
	// TruePositive counts pixels mapped as changed and changed in the
	// reference, FalsePositive mapped as changed but unchanged in the
	// reference, FalseNegative mapped as unchanged but changed in the
	// reference, TrueNegative unchanged in both.
	TruePositive  int64 `json:"true_positive"`
	FalsePositive int64 `json:"false_positive"`
	FalseNegative int64 `json:"false_negative"`
	TrueNegative  int64 `json:"true_negative"`
}

// Add counts one pixel, mapped as changed or not and changed or not in the
// reference.
func (c *Confusion) Add(mapped, reference bool) {
	switch {
	case mapped && reference:
		c.TruePositive++
	case mapped:
		c.FalsePositive++
	case reference:
		c.FalseNegative++
	default:
		c.TrueNegative++
	}
}

// Merge adds the counts of o to c.
func (c *Confusion) Merge(o Confusion) {
	c.TruePositive += o.TruePositive
	c.FalsePositive += o.FalsePositive
	c.FalseNegative += o.FalseNegative
	c.TrueNegative += o.TrueNegative
}

// Rates are the accuracy measures of a Confusion. A rate whose denominator is
// zero is undefined and nil, written as JSON null; none is ever NaN.
type Rates struct {
	// Precision is TP / (TP + FP), the share of the pixels mapped as
	// changed that changed (the user's accuracy of the change class).
	Precision *float64 `json:"precision"`
	// Recall is TP / (TP + FN), the share of the changed pixels that are
	// mapped (the producer's accuracy of the change class).
	Recall *float64 `json:"recall"`
	// F1 is their harmonic mean, 2·TP / (2·TP + FP + FN).
	F1 *float64 `json:"f1"`
	// OverallAccuracy is (TP + TN) / (TP + FP + FN + TN).
	OverallAccuracy *float64 `json:"overall_accuracy"`
	// FalseAlarmRate is FP / (FP + TN), the share of the unchanged pixels
	// mapped as changed.
	FalseAlarmRate *float64 `json:"false_alarm_rate"`
	// UsersAccuracy is the user's accuracy of the change class, TP / (TP +
	// FP) (equal to Precision), and CommissionError is 1 − UsersAccuracy,
	// FP / (TP + FP).
	UsersAccuracy   *float64 `json:"users_accuracy"`
	CommissionError *float64 `json:"commission_error"`
	// ProducersAccuracy is the producer's accuracy of the change class, TP
	// / (TP + FN) (equal to Recall), and OmissionError is 1 −
	// ProducersAccuracy, FN / (TP + FN).
	ProducersAccuracy *float64 `json:"producers_accuracy"`
	OmissionError     *float64 `json:"omission_error"`
}

// Rates returns the accuracy measures of c, with the usual definitions of
// binary classification (R. G. Congalton and K. Green, "Assessing the
// Accuracy of Remotely Sensed Data", 2nd ed., 2009, for overall, user's and
// producer's accuracy; C. J. van Rijsbergen, "Information Retrieval", 1979,
// for F1).
func (c Confusion) Rates() Rates {
	tp, fp, fn, tn := c.TruePositive, c.FalsePositive, c.FalseNegative, c.TrueNegative
	return Rates{
		Precision:       ratio(tp, tp+fp),
		Recall:          ratio(tp, tp+fn),
		F1:              ratio(2*tp, 2*tp+fp+fn),
		OverallAccuracy: ratio(tp+tn, tp+fp+fn+tn),
		FalseAlarmRate:  ratio(fp, fp+tn),

		UsersAccuracy:     ratio(tp, tp+fp),
		CommissionError:   ratio(fp, tp+fp),
		ProducersAccuracy: ratio(tp, tp+fn),
		OmissionError:     ratio(fn, tp+fn),
	}
}

// ratio returns x/y, or nil if y is zero.
func ratio(x, y int64) *float64 {
	if y == 0 {
		return nil
	}
	r := float64(x) / float64(y)
	return &r
}
