package survey

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// Allocate shares n sample units among strata of the given areas, each
// holding available[h] pixels: every stratum gets at least min (or all its
// pixels when it has fewer), the rest proportional to area, as Olofsson et
// al. (2014, section 5.1.3) recommend. Strata whose proportional share
// falls below min are set to min and the remainder shared again among the
// others; rounding is by largest remainder, so the sizes sum to n. It
// returns an error when n exceeds the pixels available or leaves a stratum
// with fewer than 2 units.
func Allocate(areas []float64, available []int, n, min int) ([]int, error) {
	if len(areas) != len(available) {
		panic(fmt.Sprintf("survey: %d areas for %d strata", len(areas), len(available)))
	}
	total := 0
	for _, a := range available {
		total += a
	}
	if n > total {
		return nil, fmt.Errorf("%d points asked but only %d pixels are available", n, total)
	}
	sizes := make([]int, len(areas))
	fixed := make([]bool, len(areas))
	for {
		left, free := n, 0.0
		for h := range areas {
			if fixed[h] {
				left -= sizes[h]
			} else {
				free += areas[h]
			}
		}
		share := largestRemainder(areas, fixed, left, free)
		changed := false
		for h := range areas {
			if fixed[h] {
				continue
			}
			floor := minInt(min, available[h])
			switch {
			case share[h] > available[h]:
				sizes[h], fixed[h], changed = available[h], true, true
			case share[h] < floor:
				sizes[h], fixed[h], changed = floor, true, true
			default:
				sizes[h] = share[h]
			}
		}
		if !changed || left < 0 {
			break
		}
	}
	sum := 0
	for h, s := range sizes {
		sum += s
		if s < 2 {
			return nil, fmt.Errorf("stratum %d would get %d points: need at least 2 in each stratum", h+1, s)
		}
	}
	if sum != n {
		return nil, fmt.Errorf("%d points cannot give every stratum its minimum of %d (need %d)", n, min, sum)
	}
	return sizes, nil
}

func minInt(a, b int) int {
	if a < b {
		return a
	}
	return b
}

// largestRemainder shares n among the strata not fixed, proportional to
// area, rounding by largest remainder (ties to the lower index).
func largestRemainder(areas []float64, fixed []bool, n int, free float64) []int {
	share := make([]int, len(areas))
	if n <= 0 || free <= 0 {
		return share
	}
	type rem struct {
		h int
		r float64
	}
	var rs []rem
	given := 0
	for h, a := range areas {
		if fixed[h] {
			continue
		}
		q := float64(n) * a / free
		share[h] = int(math.Floor(q))
		given += share[h]
		rs = append(rs, rem{h, q - math.Floor(q)})
	}
	slices.SortStableFunc(rs, func(a, b rem) int {
		switch {
		case a.r > b.r:
			return -1
		case a.r < b.r:
			return 1
		}
		return 0
	})
	for i := 0; given < n && len(rs) > 0; i = (i + 1) % len(rs) {
		share[rs[i].h]++
		given++
	}
	return share
}

// CochranSize is the sample size for a target standard error se of an
// estimated proportion under stratified random sampling (Cochran 1977,
// Sampling Techniques, eq. 5.25, as used by Olofsson et al. 2014, eq. 13):
//
//	n = (sum_h W_h S_h)^2 / (se^2 + (1/N) sum_h W_h S_h^2),   S_h = sqrt(U_h (1 - U_h))
//
// with W_h the strata's area shares, U_h the expected user's accuracy of
// each stratum and N the number of pixels (0 for an infinite population).
// The result is rounded up.
func CochranSize(weights, accuracy []float64, se float64, pixels int) int {
	if len(weights) != len(accuracy) {
		panic(fmt.Sprintf("survey: %d weights for %d accuracies", len(weights), len(accuracy)))
	}
	var ws, ws2 float64
	for h, w := range weights {
		s2 := accuracy[h] * (1 - accuracy[h])
		ws += w * math.Sqrt(s2)
		ws2 += w * s2
	}
	den := se * se
	if pixels > 0 {
		den += ws2 / float64(pixels)
	}
	return int(math.Ceil(ws * ws / den))
}

// Draw chooses, for each stratum h, sizes[h] distinct positions among
// counts[h] (0-based ranks of the stratum's pixels in raster order),
// uniformly at random, returned in ascending order. The choice depends on
// seed and the stratum index only (a PCG stream per stratum, Floyd's
// algorithm), so it is the same on every machine and for any worker count.
func Draw(counts, sizes []int, seed uint64) [][]int {
	if len(counts) != len(sizes) {
		panic(fmt.Sprintf("survey: %d counts for %d sizes", len(counts), len(sizes)))
	}
	out := make([][]int, len(counts))
	for h, c := range counts {
		k := sizes[h]
		if k > c || k < 0 {
			panic(fmt.Sprintf("survey: %d units from %d pixels", k, c))
		}
		rng := rand.New(rand.NewPCG(seed, uint64(h)+0x9e3779b97f4a7c15))
		chosen := make(map[int]struct{}, k)
		for j := c - k; j < c; j++ {
			t := rng.IntN(j + 1)
			if _, ok := chosen[t]; ok {
				t = j
			}
			chosen[t] = struct{}{}
		}
		ranks := make([]int, 0, k)
		for r := range chosen {
			ranks = append(ranks, r)
		}
		slices.Sort(ranks)
		out[h] = ranks
	}
	return out
}
