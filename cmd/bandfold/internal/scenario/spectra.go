package scenario

import (
	"fmt"
	"math"
)

// Endmembers: invented reflectance spectra (0..1) given as knots in nm.
// The shapes follow the textbook traits of each material (green peak and
// red absorption of leaves, the red edge, leaf-water dips near 970, 1200,
// 1450 and 1940 nm, a clay dip near 2200 nm for soils, the dark NIR and
// raised SWIR of charred ground), but every number is made up for this
// scenario.
type endmember uint8

const (
	emClearWater endmember = iota
	emTurbidWater
	emBroadleaf
	emConifer
	emGreenGrass
	emDryGrass
	emGreenCrop
	emLoam
	emBrightSoil
	emAsphalt
	emRoof
	emReeds
	emChar
	emScorched
	nEnd
)

type knot struct{ nm, r float64 }

var endmemberKnots = [nEnd][]knot{
	emClearWater: {{400, .055}, {450, .05}, {500, .045}, {550, .04}, {600, .028}, {650, .02},
		{700, .015}, {750, .01}, {800, .008}, {900, .005}, {1000, .004}, {1300, .003}, {2500, .002}},
	emTurbidWater: {{400, .06}, {450, .07}, {500, .085}, {550, .10}, {600, .095}, {650, .085},
		{700, .07}, {750, .04}, {800, .03}, {850, .025}, {900, .015}, {1000, .008}, {1300, .005}, {2500, .003}},
	emBroadleaf: {{400, .03}, {450, .035}, {500, .045}, {550, .085}, {600, .06}, {650, .04},
		{680, .035}, {700, .07}, {720, .17}, {750, .33}, {800, .40}, {900, .42}, {970, .40},
		{1050, .41}, {1200, .34}, {1300, .36}, {1400, .22}, {1450, .14}, {1550, .26}, {1650, .28},
		{1800, .22}, {1900, .08}, {1950, .06}, {2050, .12}, {2200, .16}, {2300, .12}, {2400, .09}, {2500, .06}},
	emConifer: {{400, .02}, {450, .025}, {500, .03}, {550, .05}, {600, .04}, {650, .03},
		{680, .025}, {700, .045}, {720, .10}, {750, .19}, {800, .24}, {900, .25}, {970, .24},
		{1050, .245}, {1200, .20}, {1300, .21}, {1400, .13}, {1450, .08}, {1550, .15}, {1650, .16},
		{1800, .13}, {1900, .045}, {1950, .035}, {2050, .065}, {2200, .085}, {2300, .065}, {2400, .05}, {2500, .035}},
	emGreenGrass: {{400, .035}, {450, .04}, {500, .055}, {550, .11}, {600, .08}, {650, .055},
		{680, .05}, {700, .09}, {720, .20}, {750, .36}, {800, .44}, {900, .46}, {970, .44},
		{1050, .45}, {1200, .38}, {1300, .39}, {1400, .25}, {1450, .17}, {1550, .30}, {1650, .32},
		{1800, .27}, {1900, .10}, {1950, .08}, {2050, .15}, {2200, .20}, {2300, .16}, {2400, .12}, {2500, .09}},
	emDryGrass: {{400, .06}, {450, .07}, {500, .09}, {550, .12}, {600, .14}, {650, .15},
		{680, .15}, {700, .17}, {720, .20}, {750, .24}, {800, .27}, {900, .30}, {1000, .32},
		{1200, .34}, {1400, .29}, {1450, .26}, {1550, .36}, {1650, .39}, {1800, .37}, {1900, .25},
		{1950, .22}, {2050, .30}, {2100, .32}, {2200, .29}, {2300, .31}, {2400, .27}, {2500, .24}},
	emGreenCrop: {{400, .03}, {450, .035}, {500, .05}, {550, .12}, {600, .07}, {650, .04},
		{680, .035}, {700, .08}, {720, .22}, {750, .42}, {800, .50}, {900, .52}, {970, .49},
		{1050, .51}, {1200, .43}, {1300, .44}, {1400, .27}, {1450, .18}, {1550, .30}, {1650, .31},
		{1800, .25}, {1900, .09}, {1950, .07}, {2050, .13}, {2200, .17}, {2300, .13}, {2400, .10}, {2500, .07}},
	emLoam: {{400, .07}, {450, .085}, {500, .10}, {550, .125}, {600, .15}, {650, .17}, {700, .19},
		{800, .22}, {900, .24}, {1000, .26}, {1200, .29}, {1400, .29}, {1450, .26}, {1550, .31},
		{1650, .33}, {1800, .33}, {1900, .27}, {1950, .25}, {2050, .30}, {2150, .31}, {2200, .28},
		{2250, .30}, {2350, .29}, {2500, .26}},
	emBrightSoil: {{400, .12}, {450, .15}, {500, .19}, {550, .23}, {600, .27}, {650, .30}, {700, .32},
		{800, .35}, {900, .37}, {1000, .39}, {1200, .42}, {1400, .41}, {1450, .38}, {1550, .44},
		{1650, .46}, {1800, .46}, {1900, .40}, {1950, .38}, {2050, .43}, {2150, .44}, {2200, .39},
		{2250, .42}, {2350, .41}, {2500, .38}},
	emAsphalt: {{400, .05}, {500, .06}, {600, .07}, {700, .08}, {800, .085}, {1000, .09},
		{1200, .10}, {1650, .11}, {2200, .10}, {2500, .09}},
	emRoof: {{400, .14}, {450, .16}, {500, .17}, {550, .18}, {600, .21}, {650, .24}, {700, .25},
		{800, .26}, {1000, .27}, {1200, .28}, {1650, .31}, {2200, .28}, {2500, .26}},
	emReeds: {{400, .03}, {450, .035}, {500, .045}, {550, .08}, {600, .06}, {650, .045},
		{680, .04}, {700, .07}, {720, .14}, {750, .24}, {800, .29}, {900, .30}, {970, .28},
		{1050, .29}, {1200, .24}, {1300, .24}, {1400, .14}, {1450, .09}, {1550, .17}, {1650, .18},
		{1800, .14}, {1900, .05}, {1950, .04}, {2050, .07}, {2200, .09}, {2300, .07}, {2400, .05}, {2500, .04}},
	emChar: {{400, .03}, {500, .033}, {600, .037}, {700, .042}, {800, .05}, {900, .06}, {1000, .07},
		{1200, .10}, {1400, .12}, {1650, .17}, {1800, .18}, {2000, .19}, {2200, .21}, {2400, .20}, {2500, .19}},
	emScorched: {{400, .04}, {500, .05}, {550, .06}, {600, .07}, {650, .08}, {700, .10}, {750, .13},
		{800, .15}, {900, .17}, {1000, .18}, {1200, .20}, {1400, .20}, {1650, .26}, {1800, .27},
		{1950, .20}, {2200, .27}, {2400, .25}, {2500, .23}},
}

// linear interpolates the knots at wavelength nm (clamped at the ends).
func linear(k []knot, nm float64) float64 {
	if nm <= k[0].nm {
		return k[0].r
	}
	for i := 1; i < len(k); i++ {
		if nm <= k[i].nm {
			t := (nm - k[i-1].nm) / (k[i].nm - k[i-1].nm)
			return k[i-1].r + t*(k[i].r-k[i-1].r)
		}
	}
	return k[len(k)-1].r
}

// Smoothed spectra are tabulated every specStep nm from specFirst to
// specLast: the piecewise-linear knots convolved with a Gaussian of
// specSigma nm, so that every spectrum is smooth.
const (
	specFirst = 300.0
	specLast  = 2600.0
	specStep  = 2.0
	specSigma = 12.0
)

// smoothSpectrum tabulates the smoothed spectrum of an endmember.
func smoothSpectrum(e endmember) []float64 {
	n := int((specLast-specFirst)/specStep) + 1
	raw := make([]float64, n)
	for i := range raw {
		raw[i] = linear(endmemberKnots[e], specFirst+float64(i)*specStep)
	}
	half := int(3 * specSigma / specStep)
	kern := make([]float64, 2*half+1)
	for i := range kern {
		g := float64(i-half) * specStep
		kern[i] = math.Exp(-0.5 * g * g / (specSigma * specSigma))
	}
	out := make([]float64, n)
	for i := range out {
		sum, wsum := 0.0, 0.0
		for k, w := range kern {
			if j := i + k - half; j >= 0 && j < n {
				sum += w * raw[j]
				wsum += w
			}
		}
		out[i] = sum / wsum
	}
	return out
}

// bandAverage averages a tabulated spectrum over a box band of centre nm
// and full width fwhm.
func bandAverage(tab []float64, nm, fwhm float64) float64 {
	lo := int(math.Round((nm - fwhm/2 - specFirst) / specStep))
	hi := int(math.Round((nm + fwhm/2 - specFirst) / specStep))
	sum := 0.0
	for i := lo; i <= hi; i++ {
		sum += tab[i]
	}
	return sum / float64(hi-lo+1)
}

// msBand describes one band of the invented 8-band multispectral sensor.
type msBand struct {
	name     string
	nm, fwhm float64
	sigma    float64 // sensor noise, reflectance x 10000
}

var msBands = [MSBands]msBand{
	{"blue", 478, 56, 42},
	{"green", 553, 38, 38},
	{"red", 659, 32, 36},
	{"red-edge-1", 712, 16, 40},
	{"red-edge-2", 751, 16, 42},
	{"nir", 829, 100, 48},
	{"swir-1", 1627, 90, 56},
	{"swir-2", 2176, 170, 52},
}

// Radiometric difference of the after date relative to the before date:
// a per-band gain and offset (reflectance x 10000), standing for
// calibration drift, atmosphere and a slightly different phenology.
var (
	afterGain   = [MSBands]float64{1.025, 1.018, 1.012, 1.004, 0.992, 0.986, 1.010, 1.021}
	afterOffset = [MSBands]float64{38, 29, 21, 12, 0, -18, 14, 26}
)

// Hyperspectral sensor: HyperBands bands evenly spaced from hyperFirstNM to
// hyperLastNM.
const (
	hyperFirstNM = 400.0
	hyperLastNM  = 2500.0
)

func hyperCentre(b int) float64 {
	return hyperFirstNM + float64(b)*(hyperLastNM-hyperFirstNM)/float64(HyperBands-1)
}

// hyperFWHM is the band width of the hyperspectral sensor (a little wider
// than the band spacing).
var hyperFWHM = 1.2 * (hyperLastNM - hyperFirstNM) / float64(HyperBands-1)

// transmission is the invented residual atmospheric transmission left in
// the hyperspectral surface reflectance: deep water-vapour bands near 1400
// and 1900 nm, weaker ones near 940 and 1130 nm, and the oxygen line near
// 760 nm. Signal is multiplied by it; noise is divided by its square root.
func transmission(nm float64) float64 {
	dip := func(c, w, d float64) float64 { return d * math.Exp(-((nm-c)/w)*((nm-c)/w)) }
	t := 1 - dip(1395, 38, 0.93) - dip(1880, 48, 0.95) - dip(940, 25, 0.35) - dip(1135, 25, 0.25) - dip(762, 8, 0.12)
	return math.Max(t, 0.04)
}

// hyperSigma is the sensor noise (reflectance x 10000) of band b before the
// transmission penalty: higher at the blue end and in the SWIR.
func hyperSigma(nm float64) float64 {
	return 22 + 22*math.Min(math.Max((nm-900)/1400, 0), 1) + 40*math.Exp(-(nm-400)/35)
}

// spectra holds per-scene tables: endmember values (reflectance x 10000) at
// the multispectral and hyperspectral bands, and the hyperspectral
// transmission and noise.
type spectra struct {
	ms       [nEnd][MSBands]float32
	hy       [nEnd][HyperBands]float32
	hySigma  [HyperBands]float32
	hyCentre [HyperBands]float64
}

func newSpectra() *spectra {
	s := &spectra{}
	for e := endmember(0); e < nEnd; e++ {
		tab := smoothSpectrum(e)
		for b, mb := range msBands {
			s.ms[e][b] = float32(1e4 * bandAverage(tab, mb.nm, mb.fwhm))
		}
		for b := 0; b < HyperBands; b++ {
			nm := hyperCentre(b)
			s.hy[e][b] = float32(1e4 * transmission(nm) * bandAverage(tab, nm, hyperFWHM))
		}
	}
	for b := 0; b < HyperBands; b++ {
		nm := hyperCentre(b)
		s.hyCentre[b] = nm
		s.hySigma[b] = float32(hyperSigma(nm) / math.Sqrt(transmission(nm)))
	}
	return s
}

func msBandName(b int) string {
	return fmt.Sprintf("B%d %s (%.0f nm)", b+1, msBands[b].name, msBands[b].nm)
}
