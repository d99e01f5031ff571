package figures_test

import (
	"fmt"

	"bandfold/cmd/bandfold/internal/figures"
)

// A 2–98 % stretch for a quicklook band: the percentiles of the valid
// pixels become the ends of the 0..255 range. The last pixel is
// no-data and stays 0.
func ExampleStretch() {
	band := []float64{0, 10, 20, 30, 40, 50, 60, 70, 80, 90, 100, -9999}
	valid := []bool{true, true, true, true, true, true, true, true, true, true, true, false}
	p := figures.Percentiles(band, valid, 2, 98)
	fmt.Printf("2%%: %.0f, 98%%: %.0f\n", p[0], p[1])
	fmt.Println(figures.Stretch(band, valid, p[0], p[1]))
	// Output:
	// 2%: 2, 98%: 98
	// [0 21 48 74 101 128 154 181 207 234 255 0]
}
