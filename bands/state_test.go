package bands

import (
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// TestStateRoundTrip checks that State and FromState reproduce an accumulator
// bitwise, directly and through encoding/json.
func TestStateRoundTrip(t *testing.T) {
	for _, c := range []struct {
		name string
		p, n int
	}{
		{"empty", 4, 0},
		{"one pixel", 3, 1},
		{"p=7", 7, 5000},
		{"p=224", 224, 300},
	} {
		t.Run(c.name, func(t *testing.T) {
			rnd := rand.New(rand.NewPCG(9, uint64(c.p)))
			a := NewAccumulator(c.p)
			a.AddPixels(correlatedPixels(rnd, c.n, c.p), nil)
			want := a.State()

			b, err := FromState(want)
			if err != nil {
				t.Fatalf("FromState: %v", err)
			}
			// Known by construction: the state just taken.
			if !stateBitsEqual(b.State(), want) {
				t.Error("FromState(a.State()).State() differs from a.State()")
			}

			data, err := json.Marshal(want)
			if err != nil {
				t.Fatalf("json.Marshal: %v", err)
			}
			var decoded State
			if err := json.Unmarshal(data, &decoded); err != nil {
				t.Fatalf("json.Unmarshal: %v", err)
			}
			b, err = FromState(decoded)
			if err != nil {
				t.Fatalf("FromState after JSON: %v", err)
			}
			// Known by construction: encoding/json writes float64 in the
			// shortest form that parses back to the same bits.
			if !stateBitsEqual(b.State(), want) {
				t.Error("state differs after a JSON round trip")
			}
		})
	}
}

// TestStateJSONKeys checks the JSON field names that partial files use.
func TestStateJSONKeys(t *testing.T) {
	a := NewAccumulator(2)
	a.AddPixels([]float64{1, 2, 3, 6}, nil)
	data, err := json.Marshal(a.State())
	if err != nil {
		t.Fatal(err)
	}
	// Known by construction: mean (2, 4), M = [[2, 4], [4, 8]], extremes.
	const want = `{"count":2,"mean":[2,4],"comoment":[[2,4],[4,8]],"min":[1,2],"max":[3,6]}`
	if string(data) != want {
		t.Errorf("JSON = %s, want %s", data, want)
	}
}

func validState() State {
	return State{
		Count:    3,
		Mean:     []float64{1, 2},
		CoMoment: [][]float64{{2, 1}, {1, 4}},
		Min:      []float64{0, 0},
		Max:      []float64{2, 4},
	}
}

// TestFromStateRejects checks that malformed states give an error wrapping
// ErrInvalidState.
func TestFromStateRejects(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, c := range []struct {
		name   string
		modify func(*State)
	}{
		{"no bands", func(s *State) { s.Mean, s.CoMoment, s.Min, s.Max = nil, nil, nil, nil }},
		{"negative count", func(s *State) { s.Count = -1 }},
		{"NaN count", func(s *State) { s.Count = nan }},
		{"infinite count", func(s *State) { s.Count = inf }},
		{"short mean", func(s *State) { s.Mean = s.Mean[:1] }},
		{"missing comoment row", func(s *State) { s.CoMoment = s.CoMoment[:1] }},
		{"short comoment row", func(s *State) { s.CoMoment[1] = s.CoMoment[1][:1] }},
		{"long comoment row", func(s *State) { s.CoMoment[0] = append(s.CoMoment[0], 0) }},
		{"short min", func(s *State) { s.Min = s.Min[:1] }},
		{"missing max", func(s *State) { s.Max = nil }},
		{"NaN mean", func(s *State) { s.Mean[1] = nan }},
		{"infinite comoment", func(s *State) { s.CoMoment[0][0] = inf }},
		{"NaN off-diagonal", func(s *State) { s.CoMoment[0][1], s.CoMoment[1][0] = nan, nan }},
		{"infinite min", func(s *State) { s.Min[0] = -inf }},
		{"asymmetric", func(s *State) { s.CoMoment[0][1] = 1.5 }},
		{"negative diagonal", func(s *State) { s.CoMoment[1][1] = -1 }},
		{"min above max", func(s *State) { s.Min[1] = 5 }},
		{"empty with extremes", func(s *State) {
			*s = State{Mean: []float64{0}, CoMoment: [][]float64{{0}}, Min: []float64{0}, Max: []float64{0}}
		}},
		{"empty with mean", func(s *State) {
			*s = State{Mean: []float64{1}, CoMoment: [][]float64{{0}}}
		}},
		{"empty with co-moment", func(s *State) {
			*s = State{Mean: []float64{0}, CoMoment: [][]float64{{1}}}
		}},
	} {
		t.Run(c.name, func(t *testing.T) {
			s := validState()
			c.modify(&s)
			a, err := FromState(s)
			// Known by construction: each case breaks one rule of State.
			if !errors.Is(err, ErrInvalidState) {
				t.Errorf("FromState = %v, %v; want an error wrapping ErrInvalidState", a, err)
			}
		})
	}
	if _, err := FromState(validState()); err != nil {
		t.Errorf("FromState(valid) = %v", err)
	}
}

// FuzzFromStateJSON feeds arbitrary JSON through FromState. Whatever it
// accepts must survive a JSON round trip bitwise and give statistics without
// panicking.
func FuzzFromStateJSON(f *testing.F) {
	a := NewAccumulator(3)
	a.AddPixels(correlatedPixels(rand.New(rand.NewPCG(10, 10)), 50, 3), nil)
	for _, s := range []State{a.State(), NewAccumulator(2).State(), validState()} {
		data, err := json.Marshal(s)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte(`{"count":1,"mean":[1],"comoment":[[0]],"min":[1],"max":[1]}`))
	f.Add([]byte(`{"count":2,"mean":[1,2],"comoment":[[1,2],[3,4]],"min":[0,0],"max":[1,1]}`))
	f.Add([]byte(`{"count":-0,"mean":[-0],"comoment":[[-0]],"min":null,"max":[]}`))
	f.Add([]byte(`{"count":1e308,"mean":[1e308],"comoment":[[1e308]],"min":[-1e308],"max":[1e308]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		var s State
		if json.Unmarshal(data, &s) != nil {
			return
		}
		a, err := FromState(s)
		if err != nil {
			if !errors.Is(err, ErrInvalidState) {
				t.Fatalf("error %v does not wrap ErrInvalidState", err)
			}
			return
		}
		a.Mean(nil)
		a.StdDev(nil)
		a.Covariance(nil)
		a.Correlation(nil)
		a.Merge(a)

		b, err := FromState(s)
		if err != nil {
			t.Fatalf("second FromState: %v", err)
		}
		want := b.State()
		out, err := json.Marshal(want)
		if err != nil {
			t.Fatalf("json.Marshal of an accepted state: %v", err)
		}
		var back State
		if err := json.Unmarshal(out, &back); err != nil {
			t.Fatal(err)
		}
		c, err := FromState(back)
		if err != nil {
			t.Fatalf("FromState rejects its own output %s: %v", out, err)
		}
		if !stateBitsEqual(c.State(), want) {
			t.Fatalf("round trip of %s differs", out)
		}
	})
}

// TestTooLarge (issue 24, item 10): values of 1e300, whose squares pass the
// float64 range, make the co-moment NaN; the accumulator and its state say
// so with ErrTooLarge (known by construction: (1e300)^2 = +Inf), and
// values of 1e150 are summed.
func TestTooLarge(t *testing.T) {
	for _, c := range []struct {
		v    float64
		want error
	}{{1e300, ErrTooLarge}, {1e150, nil}} {
		a := NewAccumulator(2)
		a.AddPixels([]float64{c.v, 1, -c.v, 2, c.v / 2, 3}, []bool{true, true, true})
		if err := a.Err(); !errors.Is(err, c.want) || (c.want == nil) != (err == nil) {
			t.Errorf("%g: Err() = %v, want %v", c.v, err, c.want)
		}
		_, err := FromState(a.State())
		if (c.want == nil) != (err == nil) || c.want != nil && (!errors.Is(err, ErrTooLarge) || !errors.Is(err, ErrInvalidState) || strings.Contains(err.Error(), "NaN")) {
			t.Errorf("%g: FromState = %v, want %v", c.v, err, c.want)
		}
	}
}
