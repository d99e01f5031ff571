package change

import (
	"encoding/json"
	"math"
	"testing"
)

// rate returns *r, or NaN for nil, for messages.
func rate(r *float64) float64 {
	if r == nil {
		return math.NaN()
	}
	return *r
}

func TestConfusionRates(t *testing.T) {
	// 1000 pixels worked by hand: 50 changed in the reference, of which 30
	// are mapped; 10 of the 950 unchanged are mapped as changed.
	var c Confusion
	for range 30 {
		c.Add(true, true)
	}
	for range 10 {
		c.Add(true, false)
	}
	for range 20 {
		c.Add(false, true)
	}
	for range 940 {
		c.Add(false, false)
	}
	if want := (Confusion{TruePositive: 30, FalsePositive: 10, FalseNegative: 20, TrueNegative: 940}); c != want {
		t.Fatalf("counts %+v, want %+v", c, want)
	}
	r := c.Rates()
	for _, tc := range []struct {
		name      string
		got       *float64
		want, tol float64
	}{
		{"precision", r.Precision, 30.0 / 40, 0},         // 30 / (30 + 10) = 0.75
		{"recall", r.Recall, 30.0 / 50, 0},               // 30 / (30 + 20) = 0.6
		{"F1", r.F1, 60.0 / 90, 1e-15},                   // 2·30 / (60 + 10 + 20) = 2/3, the harmonic mean of 0.75 and 0.6
		{"overall accuracy", r.OverallAccuracy, 0.97, 0}, // (30 + 940) / 1000
		{"false alarm rate", r.FalseAlarmRate, 10.0 / 950, 0},
		// Congalton and Green (2009), ch. 5: user's accuracy of the change
		// class is its row total's share correct, producer's its column's.
		{"user's accuracy", r.UsersAccuracy, 30.0 / 40, 0},         // 30 of the 40 mapped changed
		{"commission error", r.CommissionError, 10.0 / 40, 0},      // 10 of the 40 mapped changed are not
		{"producer's accuracy", r.ProducersAccuracy, 30.0 / 50, 0}, // 30 of the 50 changed in the reference
		{"omission error", r.OmissionError, 20.0 / 50, 0},          // 20 of the 50 are missed
	} {
		if tc.got == nil || math.Abs(*tc.got-tc.want) > tc.tol*tc.want {
			t.Errorf("%s = %v, want %v", tc.name, rate(tc.got), tc.want)
		}
	}

	// Merging the counts of two halves gives the whole (known by
	// construction).
	var a, b Confusion
	a.Merge(Confusion{TruePositive: 10, FalsePositive: 5, FalseNegative: 20, TrueNegative: 400})
	b.Merge(Confusion{TruePositive: 20, FalsePositive: 5, TrueNegative: 540})
	a.Merge(b)
	if a != c {
		t.Errorf("merged %+v, want %+v", a, c)
	}
}

// TestConfusionUndefined: rates with a zero denominator are nil and written
// as JSON null, never NaN.
func TestConfusionUndefined(t *testing.T) {
	// No changed reference pixel and none mapped: only the overall
	// accuracy (1) and the false alarm rate (0) are defined.
	c := Confusion{TrueNegative: 100}
	r := c.Rates()
	if r.Precision != nil || r.Recall != nil || r.F1 != nil {
		t.Errorf("precision, recall, F1 = %v, %v, %v; want undefined", rate(r.Precision), rate(r.Recall), rate(r.F1))
	}
	if rate(r.OverallAccuracy) != 1 || rate(r.FalseAlarmRate) != 0 {
		t.Errorf("overall accuracy %v, false alarm rate %v; want 1 and 0", rate(r.OverallAccuracy), rate(r.FalseAlarmRate))
	}
	data, err := json.Marshal(r)
	if err != nil {
		t.Fatal(err)
	}
	if want := `{"precision":null,"recall":null,"f1":null,"overall_accuracy":1,"false_alarm_rate":0,"users_accuracy":null,"commission_error":null,"producers_accuracy":null,"omission_error":null}`; string(data) != want {
		t.Errorf("JSON %s, want %s", data, want)
	}

	// No changed reference pixel but 5 false alarms: precision and F1 are
	// 0/5 = 0, recall stays undefined.
	r = Confusion{FalsePositive: 5, TrueNegative: 95}.Rates()
	if r.Recall != nil || rate(r.Precision) != 0 || rate(r.F1) != 0 || rate(r.FalseAlarmRate) != 0.05 {
		t.Errorf("rates %v %v %v %v; want recall undefined, precision 0, F1 0, false alarms 0.05",
			rate(r.Recall), rate(r.Precision), rate(r.F1), rate(r.FalseAlarmRate))
	}

	// No pixel at all: everything undefined.
	data, err = json.Marshal(Confusion{}.Rates())
	if err != nil {
		t.Fatal(err)
	}
	if want := `{"precision":null,"recall":null,"f1":null,"overall_accuracy":null,"false_alarm_rate":null,"users_accuracy":null,"commission_error":null,"producers_accuracy":null,"omission_error":null}`; string(data) != want {
		t.Errorf("JSON %s, want %s", data, want)
	}
	data, err = json.Marshal(Confusion{TruePositive: 1, FalsePositive: 2, FalseNegative: 3, TrueNegative: 4})
	if err != nil {
		t.Fatal(err)
	}
	if want := `{"true_positive":1,"false_positive":2,"false_negative":3,"true_negative":4}`; string(data) != want {
		t.Errorf("JSON %s, want %s", data, want)
	}
}
