package bands

import (
	"errors"
	"fmt"
	"math"
)

// State is the plain form of an Accumulator, suitable for encoding/json. It is
// what shards of a job write as partial results and a merge step reads back.
//
// CoMoment holds the full p×p co-moment matrix as rows. For an empty state
// (Count 0) Mean and CoMoment are zero and Min and Max are nil, since the
// extremes of no pixels have no finite value.
type State struct {
	Count    float64     `json:"count"`
	Mean     []float64   `json:"mean"`
	CoMoment [][]float64 `json:"comoment"`
	Min      []float64   `json:"min"`
	Max      []float64   `json:"max"`
	// Exact holds the exact integer sums of an exact accumulator
	// (NewExactAccumulator), nil for any other; Mean and CoMoment are then
	// the values derived from them.
	Exact *ExactState `json:"exact,omitempty"`
}

// State returns the statistics of a as a State sharing no memory with a.
// FromState(a.State()) reproduces a exactly.
func (a *Accumulator) State() State {
	a.sync()
	p := a.p
	s := State{
		Count:    a.n,
		Mean:     append([]float64(nil), a.mean...),
		CoMoment: make([][]float64, p),
	}
	for i := range s.CoMoment {
		row := make([]float64, p)
		for j := range row {
			row[j] = a.com[min(i, j)*p+max(i, j)]
		}
		s.CoMoment[i] = row
	}
	if a.n > 0 {
		s.Min = append([]float64(nil), a.min...)
		s.Max = append([]float64(nil), a.max...)
	}
	if a.exact != nil {
		s.Exact = a.exactState()
	}
	return s
}

// FromState returns an Accumulator holding the statistics in s. It returns an
// error wrapping ErrInvalidState if s is malformed: no bands, inconsistent
// lengths, a non-finite value (a mean or co-moment that is not finite
// also wraps ErrTooLarge: the sums overflowed), a negative count, an asymmetric co-moment
// matrix or one with a negative diagonal, a minimum above a maximum, or an
// empty state with non-zero statistics, or exact sums that are malformed or
// do not give its count, mean and co-moment. A state with exact sums gives
// an exact accumulator.
func FromState(s State) (*Accumulator, error) {
	if err := s.check(); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrInvalidState, err)
	}
	a := NewAccumulator(len(s.Mean))
	p := a.p
	a.n = s.Count
	copy(a.mean, s.Mean)
	for i, row := range s.CoMoment {
		copy(a.com[i*p+i:i*p+p], row[i:])
	}
	if s.Count > 0 {
		copy(a.min, s.Min)
		copy(a.max, s.Max)
	}
	if s.Exact != nil {
		if err := a.fromExactState(s); err != nil {
			return nil, fmt.Errorf("%w: %s", ErrInvalidState, err)
		}
	}
	return a, nil
}

// check returns a description of what is wrong with s, or nil.
func (s *State) check() error {
	p := len(s.Mean)
	if p == 0 {
		return errors.New("no bands")
	}
	if math.IsNaN(s.Count) || math.IsInf(s.Count, 0) || s.Count < 0 {
		return fmt.Errorf("count %v is not a finite non-negative number", s.Count)
	}
	if len(s.CoMoment) != p {
		return fmt.Errorf("comoment has %d rows, want %d", len(s.CoMoment), p)
	}
	for i, row := range s.CoMoment {
		if len(row) != p {
			return fmt.Errorf("comoment row %d has length %d, want %d", i, len(row), p)
		}
	}
	empty := s.Count == 0
	if empty {
		if len(s.Min) != 0 || len(s.Max) != 0 {
			return errors.New("empty state has min or max")
		}
	} else if len(s.Min) != p || len(s.Max) != p {
		return fmt.Errorf("min and max have lengths %d and %d, want %d", len(s.Min), len(s.Max), p)
	}
	if !allFinite(s.Mean) {
		return ErrTooLarge
	}
	if err := checkVector("mean", s.Mean, empty); err != nil {
		return err
	}
	for i, row := range s.CoMoment {
		if !allFinite(row) {
			return ErrTooLarge
		}
		if err := checkVector(fmt.Sprintf("comoment row %d", i), row, empty); err != nil {
			return err
		}
		if row[i] < 0 {
			return fmt.Errorf("comoment diagonal %d is negative", i)
		}
		for j := i + 1; j < p; j++ {
			if row[j] != s.CoMoment[j][i] {
				return fmt.Errorf("comoment is not symmetric at (%d, %d)", i, j)
			}
		}
	}
	if err := checkVector("min", s.Min, false); err != nil {
		return err
	}
	if err := checkVector("max", s.Max, false); err != nil {
		return err
	}
	for i := range s.Min {
		if s.Min[i] > s.Max[i] {
			return fmt.Errorf("band %d has min %v above max %v", i, s.Min[i], s.Max[i])
		}
	}
	return nil
}

// checkVector checks that v is finite and, if zero is set, all zero.
func checkVector(name string, v []float64, zero bool) error {
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return fmt.Errorf("%s[%d] is %v", name, i, x)
		}
		if zero && x != 0 {
			return fmt.Errorf("%s[%d] is %v in an empty state", name, i, x)
		}
	}
	return nil
}
