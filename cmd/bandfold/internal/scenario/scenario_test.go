package scenario

import (
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Unless said otherwise, the expected values in these tests are known by
// construction: they follow from how the scene is designed in this package.

func newTestCatchment(t testing.TB, w, h int, seed uint64) *Catchment {
	t.Helper()
	c, err := NewCatchment(w, h, seed)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// windows are odd-sized sub-windows of a big render at (-5, -3) of size
// 266 x 231 (which overhangs a 256 x 224 scene on all sides).
var windows = [][4]int{{-5, -3, 1, 1}, {0, 0, 1, 1}, {13, 7, 37, 29}, {101, 55, 64, 3}, {200, 150, 61, 78}, {70, 40, 97, 101}, {255, 223, 6, 5}}

const bigX, bigY, bigW, bigH = -5, -3, 266, 231

// checkCut compares each window render with the same pixels of the big
// render, exactly.
func checkCut[T comparable](t *testing.T, name string, bands int, render func(x0, y0, w, h int, dst []T)) {
	t.Helper()
	big := make([]T, bigW*bigH*bands)
	render(bigX, bigY, bigW, bigH, big)
	for _, wd := range windows {
		x0, y0, w, h := wd[0], wd[1], wd[2], wd[3]
		got := make([]T, w*h*bands)
		render(x0, y0, w, h, got)
		for j := range h {
			for i := range w {
				for b := range bands {
					want := big[((y0-bigY+j)*bigW+x0-bigX+i)*bands+b]
					if g := got[(j*w+i)*bands+b]; g != want {
						t.Fatalf("%s window %v pixel (%d,%d) band %d: %v, big render %v", name, wd, x0+i, y0+j, b, g, want)
					}
				}
			}
		}
	}
}

func TestWindowsMatchBigRender(t *testing.T) {
	c := newTestCatchment(t, 256, 224, 11)
	for date := range 2 {
		checkCut(t, "multispectral", MSBands, func(x0, y0, w, h int, dst []float64) { c.Multispectral(date, x0, y0, w, h, dst) })
		checkCut(t, "classmap", 1, func(x0, y0, w, h int, dst []uint8) { c.ClassMap(date, x0, y0, w, h, dst) })
	}
	checkCut(t, "truth", 1, c.TruthIDs)
	checkCut(t, "hyperspectral", HyperBands, c.Hyperspectral)
	for _, typ := range []string{"int16", "uint16", "float32"} {
		s := Synth{Bands: 7, Width: 256, Height: 224, Type: typ, Seed: 5}
		checkCut(t, "synth "+typ, s.Bands, s.Render)
	}
}

func TestDeterministicAcrossInstances(t *testing.T) {
	a, b := newTestCatchment(t, 128, 128, 3), newTestCatchment(t, 128, 128, 3)
	other := newTestCatchment(t, 128, 128, 4)
	da, db, dc := make([]float64, 40*40*MSBands), make([]float64, 40*40*MSBands), make([]float64, 40*40*MSBands)
	a.Multispectral(1, 44, 44, 40, 40, da)
	b.Multispectral(1, 44, 44, 40, 40, db)
	other.Multispectral(1, 44, 44, 40, 40, dc)
	same := 0
	for i := range da {
		if da[i] != db[i] {
			t.Fatalf("value %d differs between two catchments of the same seed", i)
		}
		if da[i] == dc[i] {
			same++
		}
	}
	if same > len(da)/4 {
		t.Errorf("seeds 3 and 4 share %d of %d values", same, len(da))
	}
}

func TestNewCatchmentRejectsBadSizes(t *testing.T) {
	for _, s := range [][2]int{{0, 100}, {31, 100}, {100, -1}, {1 << 21, 64}} {
		if _, err := NewCatchment(s[0], s[1], 1); err == nil {
			t.Errorf("size %v accepted", s)
		}
	}
}

// render is a full-scene render of every product of a catchment.
type render struct {
	c          *Catchment
	w, h       int
	ms         [2][]float64
	class      [2][]uint8
	ids, truth []uint8
}

func renderAll(t testing.TB, w, h int, seed uint64) *render {
	r := &render{c: newTestCatchment(t, w, h, seed), w: w, h: h}
	for d := range 2 {
		r.ms[d] = make([]float64, w*h*MSBands)
		r.c.Multispectral(d, 0, 0, w, h, r.ms[d])
		r.class[d] = make([]uint8, w*h)
		r.c.ClassMap(d, 0, 0, w, h, r.class[d])
	}
	r.ids = make([]uint8, w*h)
	r.c.TruthIDs(0, 0, w, h, r.ids)
	r.truth = make([]uint8, w*h)
	r.c.Truth(0, 0, w, h, r.truth)
	return r
}

func TestEventAreas(t *testing.T) {
	// Designed ranges, as fractions of the scene area: the patches are laid
	// out relative to the scene, so the fractions hold at every size (at
	// 2048 x 2048 they are tens of thousands of pixels each).
	ranges := map[uint8][2]float64{
		EventClearing:  {0.004, 0.011},
		EventReservoir: {0.005, 0.013},
		EventBurn:      {0.005, 0.015},
	}
	for _, tc := range []struct {
		w, h int
		seed uint64
	}{{384, 384, 1}, {256, 256, 2}, {256, 256, 3}, {320, 256, 4}} {
		r := renderAll(t, tc.w, tc.h, tc.seed)
		area := float64(tc.w * tc.h)
		count := map[uint8]int{}
		for _, v := range r.ids {
			count[v]++
		}
		total := 0.0
		for _, ev := range r.c.Events() {
			frac := float64(ev.Area) / area
			total += frac
			rg := ranges[ev.ID]
			if frac < rg[0] || frac > rg[1] {
				t.Errorf("%dx%d seed %d: %s covers %.4f of the scene, designed %v", tc.w, tc.h, tc.seed, ev.Name, frac, rg)
			}
			if ev.Area != count[ev.ID] {
				t.Errorf("%s: Events says %d pixels, the truth has %d", ev.Name, ev.Area, count[ev.ID])
			}
			if ev.Bounds.Empty() || ev.Bounds.Dx() < 10 || ev.Bounds.Dy() < 10 {
				t.Errorf("%s: bounds %v", ev.Name, ev.Bounds)
			}
		}
		if total < 0.015 || total > 0.04 {
			t.Errorf("%dx%d seed %d: total change %.4f of the scene, want a few percent", tc.w, tc.h, tc.seed, total)
		}
	}
}

func TestTruthMatchesClassMaps(t *testing.T) {
	r := renderAll(t, 256, 256, 5)
	for n := range r.ids {
		c0, c1, id := Class(r.class[0][n]), Class(r.class[1][n]), r.ids[n]
		collar := c0 == TruthNoData || c1 == TruthNoData
		switch {
		case collar:
			if id != TruthNoData || r.truth[n] != TruthNoData {
				t.Fatalf("pixel %d in a collar has truth %d/%d", n, id, r.truth[n])
			}
		case c0 == c1:
			if id != 0 || r.truth[n] != 0 {
				t.Fatalf("pixel %d is %v on both dates but truth is %d", n, c0, id)
			}
		default:
			if r.truth[n] != 1 {
				t.Fatalf("pixel %d changed %v -> %v but binary truth is %d", n, c0, c1, r.truth[n])
			}
			ok := false
			switch id {
			case EventClearing:
				ok = c0 == Forest && c1 == BareSoil
			case EventReservoir:
				ok = c0 != Water && c1 == Water
			case EventBurn:
				ok = (c0 == Forest || c0 == Grassland) && c1 == Burnt
			}
			if !ok {
				t.Fatalf("pixel %d changed %v -> %v under event %d", n, c0, c1, id)
			}
		}
	}
}

func TestChangeIsStrongAndStableLandIsNot(t *testing.T) {
	r := renderAll(t, 256, 256, 6)
	// Unchanged pixels differ only by the gain/offset between dates, the
	// two illumination fields (each within about +-6%) and noise, which is
	// bounded (|gauss| <= 2*sqrt(3)): this bound holds for every pixel by
	// construction.
	var changed [4]struct {
		n   int
		sum float64
	}
	for n, id := range r.ids {
		if id == TruthNoData {
			continue
		}
		v0, v1 := r.ms[0][n*MSBands:(n+1)*MSBands], r.ms[1][n*MSBands:(n+1)*MSBands]
		norm := 0.0
		for b := range v0 {
			d := v1[b] - v0[b]
			norm += d * d / (msBands[b].sigma * msBands[b].sigma)
			limit := 0.16*v0[b] + math.Abs(afterOffset[b]) + 2*2*sqrt3*1.35*msBands[b].sigma + 1
			if id == 0 && math.Abs(d) > limit {
				t.Fatalf("unchanged pixel %d band %d: %v -> %v", n, b, v0[b], v1[b])
			}
		}
		changed[id].n++
		changed[id].sum += math.Sqrt(norm / MSBands)
	}
	// Mean change in units of the noise sigma.
	if m := changed[0].sum / float64(changed[0].n); m > 4 {
		t.Errorf("unchanged land moves %.1f sigma on average", m)
	}
	for id := 1; id <= 3; id++ {
		if changed[id].n == 0 {
			t.Fatalf("event %d missing", id)
		}
		if m := changed[id].sum / float64(changed[id].n); m < 15 {
			t.Errorf("event %d moves only %.1f sigma on average", id, m)
		}
	}
}

func TestMultispectralValuesAndCollar(t *testing.T) {
	r := renderAll(t, 200, 180, 7)
	for d := range 2 {
		inCollar := 0
		for n := range r.class[d] {
			px := r.ms[d][n*MSBands : (n+1)*MSBands]
			collar := r.class[d][n] == TruthNoData
			if collar {
				inCollar++
			}
			for _, v := range px {
				switch {
				case collar && v != MSNoData:
					t.Fatalf("date %d pixel %d: %v in the collar", d, n, v)
				case !collar && (v < 1 || v > 65535 || v != math.Trunc(v)):
					t.Fatalf("date %d pixel %d: invalid value %v", d, n, v)
				}
			}
			x, y := n%r.w, n/r.w
			if !collar && (x == 0 || y == 0 || x == r.w-1 || y == r.h-1) {
				t.Fatalf("date %d: border pixel (%d,%d) outside the collar", d, x, y)
			}
		}
		if frac := float64(inCollar) / float64(len(r.class[d])); frac < 0.02 || frac > 0.2 {
			t.Errorf("date %d: collar covers %.3f of the scene", d, frac)
		}
	}
	// Outside the scene everything is nodata.
	out := make([]float64, 4*MSBands)
	r.c.Multispectral(0, -2, 5, 2, 2, out)
	for _, v := range out {
		if v != MSNoData {
			t.Fatalf("outside the scene: %v", v)
		}
	}
}

// classMeans averages the date-0 multispectral values per class.
func classMeans(r *render, date int) (mean [NumClasses][MSBands]float64, count [NumClasses]int) {
	for n, k := range r.class[date] {
		if k == TruthNoData {
			continue
		}
		count[k]++
		for b := range MSBands {
			mean[k][b] += r.ms[date][n*MSBands+b]
		}
	}
	for k := range mean {
		for b := range mean[k] {
			mean[k][b] /= float64(max(count[k], 1))
		}
	}
	return mean, count
}

func TestSpectralSanity(t *testing.T) {
	// Common facts of the trade: healthy vegetation reflects far more in
	// the NIR than in the red (high NDVI); water is dark in the NIR and
	// SWIR; fresh burn scars are dark in the NIR and brighter in the SWIR-2
	// than the vegetation they replaced (low normalised burn ratio); bare
	// soil is brighter than vegetation in the red.
	r := renderAll(t, 384, 384, 8)
	m0, n0 := classMeans(r, 0)
	m1, n1 := classMeans(r, 1)
	for k := range NumClasses - 1 {
		if n0[k] < 100 {
			t.Fatalf("class %v has only %d pixels on date 0", Class(k), n0[k])
		}
	}
	if n1[Burnt] < 100 {
		t.Fatalf("burnt has only %d pixels on date 1", n1[Burnt])
	}
	const blue, green, red, nir, swir1, swir2 = 0, 1, 2, 5, 6, 7
	ndvi := func(v [MSBands]float64) float64 { return (v[nir] - v[red]) / (v[nir] + v[red]) }
	nbr := func(v [MSBands]float64) float64 { return (v[nir] - v[swir2]) / (v[nir] + v[swir2]) }
	// Cropland mixes green crops with ploughed fields, so its mean NDVI is
	// lower than that of forest and grassland.
	minNDVI := map[Class]float64{Forest: 0.5, Grassland: 0.5, Cropland: 0.3}
	for _, k := range []Class{Forest, Grassland, Cropland} {
		if v := m0[k]; v[nir] < 1.8*v[red] || ndvi(v) < minNDVI[k] {
			t.Errorf("%v: NIR %.0f, red %.0f, NDVI %.2f", k, v[nir], v[red], ndvi(v))
		}
		if m0[Water][nir] > m0[k][nir]/4 {
			t.Errorf("water NIR %.0f not far below %v NIR %.0f", m0[Water][nir], k, m0[k][nir])
		}
		if m0[BareSoil][red] < m0[k][red] {
			t.Errorf("bare soil red %.0f below %v red %.0f", m0[BareSoil][red], k, m0[k][red])
		}
	}
	if w := m0[Water]; ndvi(w) > 0 || w[swir1] > w[green] || w[nir] > w[blue] {
		t.Errorf("water spectrum %v", w)
	}
	if b, f := m1[Burnt], m0[Forest]; b[nir] > f[nir]/2 || b[swir2] < f[swir2] || nbr(b) > 0 || nbr(f) < 0.3 {
		t.Errorf("burnt %v vs forest %v: NBR %.2f vs %.2f", b, f, nbr(b), nbr(f))
	}
	if u := m0[Urban]; ndvi(u) > 0.3 {
		t.Errorf("urban NDVI %.2f", ndvi(u))
	}
}

func TestBandNames(t *testing.T) {
	c := newTestCatchment(t, 64, 64, 1)
	names, wl := c.BandNames(), c.BandWavelengths()
	if len(names) != MSBands || len(wl) != MSBands || names[5] != "B6 nir (829 nm)" {
		t.Fatalf("bands %q %v", names, wl)
	}
	hn, hw := c.HyperBandNames(), c.HyperWavelengths()
	if len(hn) != HyperBands || hn[0] != "H001 (400.0 nm)" || hw[0] != 400 || hw[HyperBands-1] != 2500 {
		t.Fatalf("hyper bands %q ... %q, %v ... %v", hn[0], hn[HyperBands-1], hw[0], hw[HyperBands-1])
	}
	for b := 1; b < MSBands; b++ {
		if wl[b] <= wl[b-1] {
			t.Errorf("band centres not increasing: %v", wl)
		}
	}
}

func TestGeoreferencing(t *testing.T) {
	c := newTestCatchment(t, 100, 64, 1)
	if !strings.Contains(c.CRS(), "+lat_0=-40 +lon_0=-120") {
		t.Errorf("CRS %s, want the invented ocean projection", c.CRS())
	}
	g, hg := c.GeoTransform(), c.HyperGeoTransform()
	if g[1] != 10 || g[5] != -10 || hg[1] != 30 || hg[5] != -30 || g[0] != hg[0] || g[3] != hg[3] || g[2] != 0 || g[4] != 0 {
		t.Errorf("geotransforms %v %v", g, hg)
	}
	// Within 50 km of the projection's centre (false origin 100 km, 100
	// km), on open ocean by construction.
	if math.Abs(g[0]-100000) > 50000 || math.Abs(g[3]-100000) > 50000 {
		t.Errorf("origin %v far from the invented centre", g)
	}
	if w, h := c.HyperSize(); w != 34 || h != 22 {
		t.Errorf("hyper size %dx%d", w, h)
	}
}

// hyperCube renders the whole hyperspectral cube of c.
func hyperCube(c *Catchment) (cube []float64, w, h int) {
	w, h = c.HyperSize()
	cube = make([]float64, w*h*HyperBands)
	c.Hyperspectral(0, 0, w, h, cube)
	return cube, w, h
}

func TestHyperspectralValues(t *testing.T) {
	c := newTestCatchment(t, 240, 210, 9)
	cube, w, h := hyperCube(c)
	mask := make([]bool, w*h)
	c.hyColl.fill(0, 0, w, h, mask)
	for n := range w * h {
		px := cube[n*HyperBands : (n+1)*HyperBands]
		for _, v := range px {
			switch {
			case mask[n] && v != HyperNoData:
				t.Fatalf("pixel %d in the collar: %v", n, v)
			case !mask[n] && (v <= HyperNoData || v > math.MaxInt16 || v != math.Trunc(v)):
				t.Fatalf("pixel %d: invalid %v", n, v)
			}
		}
		if x, y := n%w, n/w; !mask[n] && (x == w-1 || y == h-1 || x == 0 || y == 0) {
			t.Fatalf("edge pixel (%d,%d) not in the collar", x, y)
		}
	}
}

// validRows returns the pixels of a pixel-major cube that are not nodata.
func validRows(cube []float64, bands int, nodata float64) [][]float64 {
	var rows [][]float64
	for i := 0; i+bands <= len(cube); i += bands {
		if cube[i] != nodata {
			rows = append(rows, cube[i:i+bands])
		}
	}
	return rows
}

// explained returns the cumulative fraction of variance of the leading
// principal components of rows.
func explained(rows [][]float64) []float64 {
	p := len(rows[0])
	mean := make([]float64, p)
	for _, r := range rows {
		for b, v := range r {
			mean[b] += v
		}
	}
	for b := range mean {
		mean[b] /= float64(len(rows))
	}
	cov := make([]float64, p*p)
	d := make([]float64, p)
	for _, r := range rows {
		for b, v := range r {
			d[b] = v - mean[b]
		}
		for a := range p {
			row := cov[a*p:]
			for b := a; b < p; b++ {
				row[b] += d[a] * d[b]
			}
		}
	}
	var es mat.EigenSym
	if !es.Factorize(mat.NewSymDense(p, cov), false) {
		panic("eigen decomposition failed")
	}
	vals := es.Values(nil) // ascending
	total := 0.0
	for _, v := range vals {
		total += v
	}
	cum, s := make([]float64, p), 0.0
	for i := range cum {
		s += vals[p-1-i]
		cum[i] = s / total
	}
	return cum
}

func TestHyperspectralPCA(t *testing.T) {
	// Designed: a few endmember mixtures plus noise, so that three
	// components carry about 99% of the variance, one is far from enough
	// and the noise (strong in the faulty HyperNoisyBands) keeps the rest
	// from being negligible.
	c := newTestCatchment(t, 288, 288, 10)
	cube, _, _ := hyperCube(c)
	cum := explained(validRows(cube, HyperBands, HyperNoData))
	if cum[0] > 0.9 || cum[2] < 0.98 || cum[2] > 0.998 || cum[9] > 0.9995 {
		t.Errorf("cumulative variance of the first PCs: %.4f", cum[:10])
	}
}

func TestHyperspectralAbsorptionBands(t *testing.T) {
	// The residual water-vapour bands (by construction near 1400 and
	// 1900 nm) have less signal and more noise than the clear windows
	// next to them; noise is measured as the spread of the difference to
	// the same band in a horizontally adjacent pixel over smooth ground.
	c := newTestCatchment(t, 192, 192, 12)
	cube, w, h := hyperCube(c)
	wl := c.HyperWavelengths()
	nearest := func(nm float64) int {
		best := 0
		for b := range wl {
			if math.Abs(wl[b]-nm) < math.Abs(wl[best]-nm) {
				best = b
			}
		}
		return best
	}
	stats := func(b int) (mean, noise float64) {
		n := 0
		for y := range h {
			for x := 0; x+1 < w; x++ {
				p, q := cube[(y*w+x)*HyperBands], cube[(y*w+x+1)*HyperBands]
				if p == HyperNoData || q == HyperNoData {
					continue
				}
				a, b2 := cube[(y*w+x)*HyperBands+b], cube[(y*w+x+1)*HyperBands+b]
				mean += a
				noise += (a - b2) * (a - b2)
				n++
			}
		}
		return mean / float64(n), math.Sqrt(noise / float64(n))
	}
	for _, pair := range [][2]float64{{1400, 1250}, {1890, 1650}} {
		mAbs, nAbs := stats(nearest(pair[0]))
		mWin, nWin := stats(nearest(pair[1]))
		if mAbs > mWin/3 || nAbs < 1.5*nWin/(mWin/mAbs) {
			t.Errorf("%v nm: mean %.0f noise %.0f vs %v nm: mean %.0f noise %.0f", pair[0], mAbs, nAbs, pair[1], mWin, nWin)
		}
	}
}

func TestSynth(t *testing.T) {
	for _, typ := range []string{"int16", "uint16", "float32"} {
		s := Synth{Bands: 30, Width: 96, Height: 80, Type: typ, Seed: 21}
		cube := make([]float64, 96*80*30)
		s.Render(0, 0, 96, 80, cube)
		lo, hi := synthLimits(typ)
		for _, v := range cube {
			if v < lo || v > hi || math.IsNaN(v) {
				t.Fatalf("%s: value %v", typ, v)
			}
			if typ == "float32" && float64(float32(v)) != v {
				t.Fatalf("float32: %v not representable", v)
			}
			if typ != "float32" && v != math.Trunc(v) {
				t.Fatalf("%s: %v not integral", typ, v)
			}
		}
		// Spectrally correlated: a handful of components carry almost
		// all the variance, but not the first alone.
		cum := explained(validRows(cube, s.Bands, math.NaN()))
		if cum[0] > 0.99 || cum[5] < 0.99 {
			t.Errorf("%s: cumulative variance %.4f", typ, cum[:6])
		}
	}
	if err := (Synth{Bands: 3, Width: 8, Height: 8, Type: "int8"}).Validate(); err == nil {
		t.Error("type int8 accepted")
	}
	if err := (Synth{Bands: 0, Width: 8, Height: 8, Type: "int16"}).Validate(); err == nil {
		t.Error("zero bands accepted")
	}
	one := Synth{Bands: 1, Width: 8, Height: 8, Type: "uint16", Seed: 1}
	px := make([]float64, 4)
	one.Render(3, 3, 2, 2, px)
	if px[0] == 0 || px[0] > math.MaxUint16 {
		t.Errorf("one-band synth: %v", px)
	}
}

func TestConcurrentTiles(t *testing.T) {
	c := newTestCatchment(t, 96, 96, 13)
	whole := make([]float64, 96*96*MSBands)
	c.Multispectral(1, 0, 0, 96, 96, whole)
	tiles := make([][]float64, 9)
	done := make(chan int)
	for k := range tiles {
		go func() {
			tiles[k] = make([]float64, 32*32*MSBands)
			c.Multispectral(1, k%3*32, k/3*32, 32, 32, tiles[k])
			done <- k
		}()
	}
	for range tiles {
		<-done
	}
	for k, tile := range tiles {
		for j := range 32 {
			for i := range 32 * MSBands {
				if tile[j*32*MSBands+i] != whole[((k/3*32+j)*96+k%3*32)*MSBands+i] {
					t.Fatalf("tile %d row %d differs", k, j)
				}
			}
		}
	}
}
