package survey

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Z95 is the standard normal quantile of 0.975, the half-width of a 95%
// confidence interval in standard errors.
var Z95 = distuv.UnitNormal.Quantile(0.975)

// Unit is one interpreted sample unit: its stratum, its map class and its
// reference class (0-based).
type Unit struct{ Stratum, Map, Ref int }

// Estimate is what a survey tells of a map with C classes. Proportions are
// of the total area of the strata; multiply by Total for areas.
type Estimate struct {
	// Total is the total area (the sum of the strata's areas).
	Total float64
	// ErrorMatrix[i][j] is the estimated proportion of area mapped as
	// class i whose reference class is j.
	ErrorMatrix [][]float64
	// Area and AreaSE are the estimated proportion of area of each
	// reference class and its standard error.
	Area, AreaSE []float64
	// Users and Producers are the user's and producer's accuracy of each
	// class with their standard errors (NaN where undefined: no area mapped
	// or found as the class).
	Users, UsersSE, Producers, ProducersSE []float64
	// Overall and OverallSE are the overall accuracy and its standard error.
	Overall, OverallSE float64
}

// CI95 returns the 95% confidence interval of a value with standard error se.
func CI95(v, se float64) (lo, hi float64) { return v - Z95*se, v + Z95*se }

// ErrFewUnits is returned when a stratum has fewer than two units, so no
// variance can be estimated.
var ErrFewUnits = errors.New("fewer than 2 labelled units in a stratum")

// Olofsson is the stratified estimator of Olofsson et al. (2014) when the
// strata are the map classes: counts[i][j] is the number of sample units
// mapped as class i with reference class j, mapped[i] the area mapped as
// class i. With W_i = A_i / A and n_i. the units of map class i:
//
//	p_ij = W_i n_ij / n_i.                                   (eq. 4)
//	p_.k = sum_i p_ik,  S(p_.k)^2 = sum_i W_i^2 (n_ik/n_i.)(1 - n_ik/n_i.) / (n_i. - 1)   (eqs. 9, 10)
//	U_i = p_ii / p_i.,  V(U_i) = U_i (1 - U_i) / (n_i. - 1)   (eqs. 2, 6)
//	P_j = p_jj / p_.j,  V(P_j) = [N_j.^2 (1-P_j)^2 U_j (1-U_j) / (n_j.-1)
//	      + P_j^2 sum_{i!=j} N_i.^2 (n_ij/n_i.)(1 - n_ij/n_i.) / (n_i.-1)] / N_.j^2   (eqs. 3, 7)
//	O = sum_j p_jj,  V(O) = sum_i W_i^2 U_i (1 - U_i) / (n_i. - 1)   (eqs. 1, 5)
//
// where N_.j = sum_i N_i. n_ij / n_i. is the estimated area of reference
// class j. It panics unless counts is C x C and mapped has C entries.
func Olofsson(counts [][]int, mapped []float64) (*Estimate, error) {
	c := len(mapped)
	if len(counts) != c {
		panic(fmt.Sprintf("survey: %d rows of counts for %d classes", len(counts), c))
	}
	total := 0.0
	for _, a := range mapped {
		total += a
	}
	e := newEstimate(c, total)
	n := make([]float64, c)
	for i, row := range counts {
		if len(row) != c {
			panic(fmt.Sprintf("survey: row %d of counts has %d entries for %d classes", i, len(row), c))
		}
		for _, v := range row {
			n[i] += float64(v)
		}
		if n[i] < 2 {
			return nil, fmt.Errorf("map class %d: %w", i+1, ErrFewUnits)
		}
	}
	w := make([]float64, c)
	for i := range c {
		w[i] = mapped[i] / total
		for j := range c {
			e.ErrorMatrix[i][j] = w[i] * float64(counts[i][j]) / n[i]
		}
	}
	var vo float64
	for i := range c {
		u := float64(counts[i][i]) / n[i]
		e.Users[i], e.UsersSE[i] = u, math.Sqrt(u*(1-u)/(n[i]-1))
		vo += w[i] * w[i] * u * (1 - u) / (n[i] - 1)
		e.Overall += e.ErrorMatrix[i][i]
	}
	e.OverallSE = math.Sqrt(vo)
	for k := range c {
		var v float64
		for i := range c {
			e.Area[k] += e.ErrorMatrix[i][k]
			f := float64(counts[i][k]) / n[i]
			v += w[i] * w[i] * f * (1 - f) / (n[i] - 1)
		}
		e.AreaSE[k] = math.Sqrt(v)
	}
	for j := range c {
		nj := e.Area[j] * total // N_.j
		p := e.ErrorMatrix[j][j] / e.Area[j]
		u := e.Users[j]
		v := mapped[j] * mapped[j] * (1 - p) * (1 - p) * u * (1 - u) / (n[j] - 1)
		for i := range c {
			if i != j {
				f := float64(counts[i][j]) / n[i]
				v += p * p * mapped[i] * mapped[i] * f * (1 - f) / (n[i] - 1)
			}
		}
		e.Producers[j], e.ProducersSE[j] = p, math.Sqrt(v)/nj
	}
	return e, nil
}

func newEstimate(c int, total float64) *Estimate {
	e := &Estimate{Total: total, ErrorMatrix: make([][]float64, c)}
	for i := range c {
		e.ErrorMatrix[i] = make([]float64, c)
	}
	for _, p := range []*[]float64{&e.Area, &e.AreaSE, &e.Users, &e.UsersSE, &e.Producers, &e.ProducersSE} {
		*p = make([]float64, c)
	}
	return e
}

// Stehman estimates area and accuracy from a stratified random sample whose
// strata may differ from the map classes (Stehman 2014): strata[h] is the
// area of stratum h, classes the number of map (and reference) classes. For
// a unit variable y, with ybar_h and s2_yh its mean and sample variance in
// stratum h of n_h units and A = sum_h A_h:
//
//	proportion   Y/A = sum_h A_h ybar_h / A,   V = sum_h A_h^2 s2_yh / n_h / A^2   (eqs. 2, 25)
//	ratio        R = Y / X,                    V = sum_h A_h^2 (s2_yh + R^2 s2_xh - 2 R s_xyh) / n_h / X^2   (eqs. 27, 28)
//
// Area of class k: y = [ref = k]; overall accuracy: y = [map = ref]; error
// matrix cell (i, j): y = [map = i and ref = j]; user's accuracy of i:
// y = [map = i and ref = i], x = [map = i]; producer's accuracy of j:
// y = [map = j and ref = j], x = [ref = j]. With strata equal to the map
// classes it gives Olofsson's figures. Every stratum needs 2 units or more.
func Stehman(units []Unit, strata []float64, classes int) (*Estimate, error) {
	n := make([]int, len(strata))
	total := 0.0
	for _, a := range strata {
		total += a
	}
	for _, u := range units {
		if u.Stratum < 0 || u.Stratum >= len(strata) || u.Map < 0 || u.Map >= classes || u.Ref < 0 || u.Ref >= classes {
			panic(fmt.Sprintf("survey: unit %+v outside %d strata and %d classes", u, len(strata), classes))
		}
		n[u.Stratum]++
	}
	for h, nh := range n {
		if nh < 2 {
			return nil, fmt.Errorf("stratum %d: %w", h+1, ErrFewUnits)
		}
	}
	s := &stehman{units: units, strata: strata, n: n, total: total}
	e := newEstimate(classes, total)
	for i := range classes {
		for j := range classes {
			e.ErrorMatrix[i][j], _ = s.proportion(func(u Unit) bool { return u.Map == i && u.Ref == j })
		}
		e.Area[i], e.AreaSE[i] = s.proportion(func(u Unit) bool { return u.Ref == i })
		hit := func(u Unit) bool { return u.Map == i && u.Ref == i }
		e.Users[i], e.UsersSE[i] = s.ratio(hit, func(u Unit) bool { return u.Map == i })
		e.Producers[i], e.ProducersSE[i] = s.ratio(hit, func(u Unit) bool { return u.Ref == i })
	}
	e.Overall, e.OverallSE = s.proportion(func(u Unit) bool { return u.Map == u.Ref })
	return e, nil
}

type stehman struct {
	units  []Unit
	strata []float64
	n      []int
	total  float64
}

// moments returns per stratum the means of y and x, their sample
// variances and covariance.
func (s *stehman) moments(y, x func(Unit) bool) (my, mx, vy, vx, cxy []float64) {
	h := len(s.strata)
	my, mx, vy, vx, cxy = make([]float64, h), make([]float64, h), make([]float64, h), make([]float64, h), make([]float64, h)
	for _, u := range s.units {
		my[u.Stratum] += b2f(y(u))
		mx[u.Stratum] += b2f(x(u))
	}
	for k := range h {
		my[k] /= float64(s.n[k])
		mx[k] /= float64(s.n[k])
	}
	for _, u := range s.units {
		k := u.Stratum
		dy, dx := b2f(y(u))-my[k], b2f(x(u))-mx[k]
		vy[k] += dy * dy
		vx[k] += dx * dx
		cxy[k] += dx * dy
	}
	for k := range h {
		d := float64(s.n[k] - 1)
		vy[k], vx[k], cxy[k] = vy[k]/d, vx[k]/d, cxy[k]/d
	}
	return my, mx, vy, vx, cxy
}

func (s *stehman) proportion(y func(Unit) bool) (p, se float64) {
	my, _, vy, _, _ := s.moments(y, y)
	var v float64
	for h, a := range s.strata {
		p += a * my[h]
		v += a * a * vy[h] / float64(s.n[h])
	}
	return p / s.total, math.Sqrt(v) / s.total
}

// ratio returns R = Y/X and its standard error; NaN when X is 0.
func (s *stehman) ratio(y, x func(Unit) bool) (r, se float64) {
	my, mx, vy, vx, cxy := s.moments(y, x)
	var ty, tx float64
	for h, a := range s.strata {
		ty += a * my[h]
		tx += a * mx[h]
	}
	if tx == 0 {
		return math.NaN(), math.NaN()
	}
	r = ty / tx
	var v float64
	for h, a := range s.strata {
		v += a * a * (vy[h] + r*r*vx[h] - 2*r*cxy[h]) / float64(s.n[h])
	}
	return r, math.Sqrt(math.Max(v, 0)) / tx
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
