package transform

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"os"
	"time"

	"gonum.org/v1/gonum/mat"

	"bandfold/bands"
)

// BasisFormat is the value of the "format" member of a basis file.
const BasisFormat = "bandfold-basis"

// Band describes one input band of a basis or partial.
type Band struct {
	// Name is the band's display name, for example its description or
	// "B4".
	Name string `json:"name"`
	// Source is the path of the raster file the band is read from.
	Source string `json:"source"`
	// Index is the 1-based number of the band in Source.
	Index int `json:"index"`
	// DataType is the GDAL name of the band's storage type, for example
	// "Int16" or "Float32".
	DataType string `json:"data_type"`
	// NoData is the band's nodata value, or nil if it has none. It may be
	// NaN, the usual nodata of floating-point rasters, which the file
	// records as the string "nan" (JSON has no NaN); ±Inf is refused.
	NoData *float64 `json:"nodata"`
	// Scale and Offset convert stored values to physical ones,
	// value = stored·Scale + Offset, as GDAL defines them (1 and 0 when the
	// file declares none).
	Scale  float64 `json:"scale"`
	Offset float64 `json:"offset"`
	// Min and Max are the smallest and largest valid values of the band
	// seen while fitting, in the units of Mean (after scale and offset).
	// In a partial file they are zero: each shard's extremes are part of
	// its accumulated statistics (bands.State), merged with them. Both zero
	// count as no recorded range; otherwise ReadBasis checks that Mean lies
	// within it.
	Min float64 `json:"min"`
	Max float64 `json:"max"`
	// Calibration is how the band's stored values became the values
	// fitted: empty for the band's scale and offset metadata, "toa" for
	// Landsat top-of-atmosphere reflectance (Scale and Offset then hold the
	// reflectance coefficients divided by the sine of the sun elevation).
	Calibration string `json:"calibration,omitempty"`
	// WavelengthNM and FWHMNM are the band's centre wavelength and width in
	// nanometres, 0 when unknown: outputs rebuilt band for band from the
	// basis (unfold, denoise) carry them.
	WavelengthNM float64 `json:"wavelength_nm,omitempty"`
	FWHMNM       float64 `json:"fwhm_nm,omitempty"`
}

// Fingerprint identifies an input file by path, size and modification time,
// so that a stale basis or a foreign shard can be detected.
type Fingerprint struct {
	Path    string    `json:"path"`
	Size    int64     `json:"size"`
	ModTime time.Time `json:"mod_time"`
}

// Calibration returns how the basis's bands were calibrated: "toa" when
// they are top-of-atmosphere reflectance, else "scale".
func (b *Basis) Calibration() string {
	for _, band := range b.Bands {
		if band.Calibration != "" {
			return band.Calibration
		}
	}
	return "scale"
}

// FileFingerprint returns the Fingerprint of the file at path, with the
// modification time in UTC.
func FileFingerprint(path string) (Fingerprint, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return Fingerprint{}, err
	}
	return Fingerprint{Path: path, Size: fi.Size(), ModTime: fi.ModTime().UTC()}, nil
}

// String describes b on one line.
func (b Band) String() string {
	nodata := "none"
	if b.NoData != nil {
		nodata = fmt.Sprint(*b.NoData)
	}
	return fmt.Sprintf("%q (%s band %d, %s, nodata %s, scale %v, offset %v, valid range [%v, %v])",
		b.Name, b.Source, b.Index, b.DataType, nodata, b.Scale, b.Offset, b.Min, b.Max)
}

// String describes f on one line.
func (f Fingerprint) String() string {
	return fmt.Sprintf("%s (%d bytes, modified %s)", f.Path, f.Size, f.ModTime.Format(time.RFC3339Nano))
}

// Basis is a fitted principal component (or minimum noise fraction) basis,
// stored as a JSON basis file ("format": "bandfold-basis", "version": 1 to
// 3; version 2 adds the method, the noise covariance, wavelengths and the
// excluded bands, version 3 the source bands). Vectors and matrices are indexed
// by band in the order of Bands; p = len(Bands).
type Basis struct {
	// Format is always BasisFormat; Version is LatestVersion for bases
	// written now, 1 or 2 for older files.
	Format  string `json:"format"`
	Version int    `json:"version"`
	// Tool is the version of the program that wrote the basis.
	Tool string `json:"tool"`
	// Created is when the basis was fitted.
	Created time.Time `json:"created"`
	// Mode tells whether the eigen-decomposition is of the covariance or of
	// the correlation matrix.
	Mode Mode `json:"mode"`
	// Pixels is the number of valid pixels the statistics were taken from.
	Pixels int64 `json:"pixels"`
	// Stride is the sampling step used when accumulating the statistics
	// (1: every pixel).
	Stride int `json:"stride"`
	// Bands describes the p input bands.
	Bands []Band `json:"bands"`
	// Mean and StdDev are the band means and sample standard deviations;
	// StdDev[j] = √Covariance[j][j].
	Mean   []float64 `json:"mean"`
	StdDev []float64 `json:"stddev"`
	// Covariance is the p×p sample band covariance matrix (divisor
	// Pixels-1), in both modes.
	Covariance [][]float64 `json:"covariance"`
	// Eigenvalues are the p eigenvalues in descending order: the variances
	// of the components. In correlation mode they are those of the
	// correlation matrix R = D⁻¹ C D⁻¹, D = diag(StdDev), and sum to p.
	Eigenvalues []float64 `json:"eigenvalues"`
	// Eigenvectors holds the unit eigenvectors by row: Eigenvectors[i][j]
	// is the loading of component i on band j (row i is column i of
	// Decomposition.Vectors), signed as Decompose does.
	Eigenvectors [][]float64 `json:"eigenvectors"`
	// Components is the number k of leading components chosen for folding,
	// 1 ≤ k ≤ p.
	Components int `json:"components"`
	// Inputs fingerprints the files the statistics were taken from.
	Inputs []Fingerprint `json:"inputs"`

	// Version 2 members (see basisv2.go); absent from version 1 files.
	Method          Method      `json:"method,omitempty"`
	NoiseCovariance [][]float64 `json:"noise_covariance,omitempty"`
	NoisePairs      int64       `json:"noise_pairs,omitempty"`
	WavelengthsNM   []float64   `json:"wavelengths_nm,omitempty"`
	Excluded        []Excluded  `json:"excluded,omitempty"`

	// SourceBands, version 3, records which bands of the stack it was
	// fitted on the basis kept (see basisv3.go); absent from older files.
	SourceBands *SourceBands `json:"source_bands,omitempty"`
}

// NewBasis fits a basis to band statistics: count valid pixels with band
// means mean and sample covariance matrix cov (divisor count-1), one Band in
// bs per row of cov. In Covariance mode it decomposes cov; in Correlation
// mode the correlation matrix cov[i][j] / (sd[i]·sd[j]), sd[j] = √cov[j][j].
//
// Eigenvalues of a covariance matrix cannot be negative: slightly negative
// ones, down to -5e-9·λ₁ (far beyond what rounding does, see eigenTol), are
// rounding error and are set to zero; more negative ones are an error.
// Components is set to p, Stride to 1 and Created to the current time; the
// caller fills in Tool and Inputs and adjusts the rest before writing the
// basis.
//
// NewBasis returns an error if the statistics are not finite, the shapes
// disagree, count < 2, a Band is invalid (see ReadBasis) or, in correlation
// mode, a band is constant.
func NewBasis(mode Mode, bs []Band, count int64, mean []float64, cov mat.Symmetric) (*Basis, error) {
	b, err := newStats(mode, bs, count, mean, cov)
	if err != nil {
		return nil, err
	}
	target := cov
	if mode == Correlation {
		r, err := bands.CorrelationOf(cov)
		var zv *bands.ZeroVarianceError
		if errors.As(err, &zv) {
			return nil, fmt.Errorf("band %d (%s) is constant: its correlation is undefined (use covariance mode)", zv.Band+1, b.Bands[zv.Band].Name)
		}
		if err != nil {
			return nil, fmt.Errorf("%w", err)
		}
		target = r
	}
	d, err := Decompose(target)
	if err != nil {
		return nil, err
	}
	if err := b.setDecomposition(d, string(mode)+" matrix", "eigenvalue"); err != nil {
		return nil, err
	}
	return b, nil
}

// newStats builds the descriptive part of a basis (everything but the
// decomposition) with NewBasis's checks of the statistics.
func newStats(mode Mode, bs []Band, count int64, mean []float64, cov mat.Symmetric) (*Basis, error) {
	if !mode.valid() {
		return nil, fmt.Errorf("unknown mode %q", mode)
	}
	p := cov.SymmetricDim()
	switch {
	case p == 0:
		return nil, fmt.Errorf("no bands")
	case len(bs) != p || len(mean) != p:
		return nil, fmt.Errorf("%d bands and %d means for a %d×%d covariance matrix", len(bs), len(mean), p, p)
	case count < 2:
		return nil, fmt.Errorf("%d pixels: a covariance needs at least 2", count)
	}
	b := &Basis{
		Format:     BasisFormat,
		Version:    LatestVersion,
		Method:     PCA,
		Created:    time.Now().UTC(),
		Mode:       mode,
		Pixels:     count,
		Stride:     1,
		Bands:      append([]Band(nil), bs...),
		Mean:       append([]float64(nil), mean...),
		StdDev:     make([]float64, p),
		Covariance: make([][]float64, p),
		Components: p,
	}
	for i := range p {
		b.Covariance[i] = make([]float64, p)
		for j := range p {
			b.Covariance[i][j] = cov.At(i, j)
		}
		b.StdDev[i] = math.Sqrt(cov.At(i, i))
	}
	// Means and co-moments summed from pixels are not finite only when
	// the sums overflowed.
	finite := checkFinite("mean", b.Mean) == nil && checkFinite("stddev", b.StdDev) == nil
	for _, row := range b.Covariance {
		finite = finite && checkFinite("covariance", row) == nil
	}
	if !finite {
		return nil, bands.ErrTooLarge
	}
	return b, nil
}

// setDecomposition stores d's eigenpairs in b, clamping eigenvalues that
// rounding made slightly negative to zero, and checks the whole basis. An
// eigenvalue below -eigenTol/2 of the largest (half of eigenTol, so that
// a clamped eigenvalue still passes validate's eigenpair check) is an
// error: the matrix (named by matrix, its values by value) is not positive
// semi-definite.
func (b *Basis) setDecomposition(d Decomposition, matrix, value string) error {
	floor := -eigenTol / 2 * max(d.Values[0], 0)
	for j, v := range d.Values {
		if v < floor {
			return fmt.Errorf("%s is not positive semi-definite: %s %d is %g", matrix, value, j+1, v)
		}
		d.Values[j] = max(v, 0)
	}
	b.Eigenvalues = d.Values
	b.Eigenvectors = make([][]float64, len(d.Values))
	for i := range d.Values {
		b.Eigenvectors[i] = mat.Col(nil, i, d.Vectors)
	}
	return b.validate()
}

// ReadBasis reads and checks the basis file at path. Errors name the file and
// wrap ErrMalformed for a file that is not a well-formed, self-consistent
// basis of version 1 to LatestVersion, or ErrUnknownVersion for another
// version.
func ReadBasis(path string) (*Basis, error) {
	return readFile[Basis]("basis", BasisFormat, path)
}

func parseBasis(data []byte) (*Basis, error) { return parse[Basis](BasisFormat, data) }

// Marshal checks b and returns the content of its basis file: indented JSON,
// each array of numbers on one line (a matrix one row per line), ending in a
// newline. Writing it to disk is the caller's business.
func (b *Basis) Marshal() ([]byte, error) { return marshal("basis", b) }

// Fingerprint returns a short, stable identifier of the numeric content of b:
// the first 16 hex digits of the SHA-256 of the mode, p, Mean, StdDev,
// Covariance, Eigenvalues and Eigenvectors (as IEEE 754 bits). It ignores
// Components and all descriptive fields, so the same fit gives the same
// fingerprint whoever wrote it and whenever. Outputs record it in their
// metadata to tie them to the basis they were made with.
func (b *Basis) Fingerprint() string {
	h := sha256.New()
	fmt.Fprintf(h, "%s v%d %s p=%d\n", BasisFormat, 1, b.Mode, len(b.Mean))
	var buf [8]byte
	put := func(xs []float64) {
		for _, x := range xs {
			binary.LittleEndian.PutUint64(buf[:], math.Float64bits(x))
			h.Write(buf[:])
		}
	}
	put(b.Mean)
	put(b.StdDev)
	for _, row := range b.Covariance {
		put(row)
	}
	put(b.Eigenvalues)
	for _, row := range b.Eigenvectors {
		put(row)
	}
	for _, row := range b.NoiseCovariance { // MNF only: PCA fingerprints are as in version 1
		put(row)
	}
	return hex.EncodeToString(h.Sum(nil))[:16]
}

// validate checks the invariants ReadBasis promises, without the file name:
// the shapes, finite values and ranges of every member, and then that the
// numbers agree with each other (see consistent), so that a hand-edited or
// mixed-up file is refused instead of folding images with exit status 0.
func (b *Basis) validate() error {
	if b.Format != BasisFormat {
		return fmt.Errorf("format %q, want %q", b.Format, BasisFormat)
	}
	if err := b.checkVersion(); err != nil {
		return err
	}
	if !b.Mode.valid() {
		return fmt.Errorf("unknown mode %q", b.Mode)
	}
	p := len(b.Bands)
	if p == 0 {
		return fmt.Errorf("no bands")
	}
	if b.Pixels < 2 {
		return fmt.Errorf("pixels %d: a covariance needs at least 2", b.Pixels)
	}
	if b.Stride < 1 {
		return fmt.Errorf("stride %d is not positive", b.Stride)
	}
	if err := checkBands(b.Bands); err != nil {
		return err
	}
	for _, v := range []struct {
		name string
		x    []float64
	}{{"mean", b.Mean}, {"stddev", b.StdDev}, {"eigenvalues", b.Eigenvalues}} {
		if err := checkVector(v.name, v.x, p); err != nil {
			return err
		}
	}
	if err := checkMatrix("covariance", b.Covariance, p); err != nil {
		return err
	}
	for i := range p {
		for j := range i {
			if b.Covariance[i][j] != b.Covariance[j][i] {
				return fmt.Errorf("covariance is not symmetric at [%d][%d]", i, j)
			}
		}
	}
	if err := checkMatrix("eigenvectors", b.Eigenvectors, p); err != nil {
		return err
	}
	for j, s := range b.StdDev {
		if s < 0 || (b.Mode == Correlation && s == 0) {
			return fmt.Errorf("stddev[%d] = %v", j, s)
		}
	}
	for j, v := range b.Eigenvalues {
		if v < 0 || (j > 0 && v > b.Eigenvalues[j-1]) {
			return fmt.Errorf("eigenvalues are not non-negative and descending at %d", j)
		}
	}
	if b.Method != MNF {
		if err := checkOrthonormal(b.Eigenvectors); err != nil {
			return err
		}
	}
	if b.Components < 1 || b.Components > p {
		return fmt.Errorf("components %d out of range 1..%d", b.Components, p)
	}
	if err := b.checkMagnitudes(); err != nil {
		return err
	}
	return b.consistent()
}

// maxMagnitude bounds the size of the numbers a basis may hold: |Mean|,
// |Band.Min|, |Band.Max|, StdDev and √Eigenvalues up to 1e150, covariance
// entries up to 1e300 and, in correlation mode, StdDev down to 1e-150. A
// pixel within the fitted range then deviates from the mean by at most
// 2e150, its scores are sums of p such deviations times loadings of at most
// 1, divided by at most 1e-150 in correlation mode, so at most p·2e300, and
// the checks of consistent multiply numbers of at most 1e300 by loadings:
// nothing overflows to ±Inf (MaxFloat64 ≈ 1.8e308) for any band count below
// 10⁷. Real data stays tens of orders of magnitude inside.
const maxMagnitude = 1e150

// checkMagnitudes refuses numbers beyond maxMagnitude.
func (b *Basis) checkMagnitudes() error {
	const limit, limit2 = maxMagnitude, maxMagnitude * maxMagnitude
	for j, bd := range b.Bands {
		for _, c := range []struct {
			field    string
			v, limit float64
		}{
			{fmt.Sprintf("mean[%d]", j), b.Mean[j], limit},
			{fmt.Sprintf("stddev[%d]", j), b.StdDev[j], limit},
			{fmt.Sprintf("eigenvalues[%d]", j), b.Eigenvalues[j], limit2},
			{fmt.Sprintf("bands[%d].min", j), bd.Min, limit},
			{fmt.Sprintf("bands[%d].max", j), bd.Max, limit},
		} {
			if !(math.Abs(c.v) <= c.limit) {
				return fmt.Errorf("%s = %g is beyond ±%g: folding with it could overflow", c.field, c.v, c.limit)
			}
		}
		for i, v := range b.Covariance[j] {
			if !(math.Abs(v) <= limit2) {
				return fmt.Errorf("covariance[%d][%d] = %g is beyond ±%g: folding with it could overflow", j, i, v, limit2)
			}
		}
		if b.Mode == Correlation && b.StdDev[j] < 1/limit {
			return fmt.Errorf("stddev[%d] = %g is below %g: dividing by it in correlation mode could overflow", j, b.StdDev[j], 1/limit)
		}
	}
	return nil
}

// eigenTol is the relative tolerance, against the largest eigenvalue λ₁, of
// the eigenpair checks of consistent. LAPACK's symmetric eigensolver (dsyev,
// behind gonum's mat.EigenSym) is backward stable: each computed pair has a
// residual ‖C v − λ v‖ ≤ c·p·ε·‖C‖₂ with ε = 2⁻⁵³ ≈ 1.1e-16 and c a modest
// constant (LAPACK Users' Guide, 3rd ed., section 4.7.1), and ‖C‖₂ = λ₁ for a
// covariance or correlation matrix. The file holds every float64 with up to
// 17 significant digits, which read back exactly (one rounding of the last
// digit would add only ε·λ₁), and evaluating the residual here adds another
// p·ε·λ₁. For p = 1000 bands, p·ε ≈ 1.1e-13, so 1e-8 leaves a factor of
// 10⁵ for c and the rounding of the check itself: no basis this package
// computed is refused, while an edit that matters for folding (an
// eigenvalue, a matrix entry or a loading changed by 1e-6 of λ₁ or of 1, a
// vector from another pair) is far beyond it.
const eigenTol = 1e-8

// consistent checks that the numbers of b agree with each other:
//
//   - StdDev[j] = √Covariance[j][j] to 1e-9 relative;
//   - every stored pair is an eigenpair of the decomposed matrix A (the
//     covariance C, or in correlation mode R = D⁻¹ C D⁻¹ built from it):
//     ‖A v − λ v‖ ≤ eigenTol·λ₁, and λ equals the Rayleigh quotient
//     vᵀAv / vᵀv to eigenTol·λ₁;
//   - in correlation mode the eigenvalues sum to p, the trace of R;
//   - each Mean[j] lies within [Band.Min, Band.Max] (up to rounding), when
//     the band records a range (Min and Max not both 0, as in a partial).
func (b *Basis) consistent() error {
	p := len(b.Bands)
	for j, s := range b.StdDev {
		want := math.Sqrt(b.Covariance[j][j])
		if !(math.Abs(s-want) <= 1e-9*want) {
			return fmt.Errorf("stddev[%d] = %g, but the square root of covariance[%d][%d] is %g", j, s, j, j, want)
		}
	}
	for j, bd := range b.Bands {
		if bd.Min == 0 && bd.Max == 0 {
			continue // no range recorded
		}
		// A mean computed in floating point can pass its extremes by a
		// few ulp; 1e-9 of their magnitude covers that.
		slack := 1e-9 * max(math.Abs(bd.Min), math.Abs(bd.Max))
		if !(b.Mean[j] >= bd.Min-slack && b.Mean[j] <= bd.Max+slack) {
			return fmt.Errorf("mean[%d] = %g is outside the valid range [%g, %g] recorded for band %d", j, b.Mean[j], bd.Min, bd.Max, j+1)
		}
	}
	if b.Method == MNF {
		return b.checkMNF()
	}

	a := mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			a.SetSym(i, j, b.Covariance[i][j])
		}
	}
	name := "covariance"
	if b.Mode == Correlation {
		r, err := bands.CorrelationOf(a)
		if err != nil { // stddev > 0 and = √C_jj, checked above
			return fmt.Errorf("correlation: %w", err)
		}
		a, name = r, "correlation"
		var sum float64
		for _, v := range b.Eigenvalues {
			sum += v
		}
		if !(math.Abs(sum-float64(p)) <= eigenTol*float64(p)) {
			return fmt.Errorf("eigenvalues sum to %g, but those of a %d-band correlation matrix sum to %d", sum, p, p)
		}
	}
	scale := b.Eigenvalues[0] // ‖A‖₂ = λ₁, unless the file lies about λ₁
	for j := range p {
		scale = max(scale, a.At(j, j))
	}
	tol := eigenTol * scale

	v := mat.NewDense(p, p, nil) // eigenvectors by column
	for i, row := range b.Eigenvectors {
		v.SetCol(i, row)
	}
	var av mat.Dense
	av.Mul(a, v)
	for i, lambda := range b.Eigenvalues {
		var res, vav, vv float64
		for l := range p {
			vil, avl := v.At(l, i), av.At(l, i)
			r := avl - lambda*vil
			res += r * r
			vav += vil * avl
			vv += vil * vil
		}
		if res = math.Sqrt(res); !(res <= tol) {
			return fmt.Errorf("eigenvectors[%d] and eigenvalues[%d] = %g are not an eigenpair of the %s matrix: ‖A v − λ v‖ = %.3g > %.0e·λ₁",
				i, i, lambda, name, res, eigenTol)
		}
		if q := vav / vv; !(math.Abs(q-lambda) <= tol) {
			return fmt.Errorf("eigenvalues[%d] = %g differs from the Rayleigh quotient %g of eigenvectors[%d] on the %s matrix", i, lambda, q, i, name)
		}
	}
	return nil
}

// checkOrthonormal checks that the rows of v are orthonormal to 1e-6, which
// catches hand-edited or mixed-up eigenvectors without being fooled by
// rounding.
func checkOrthonormal(v [][]float64) error {
	for i := range v {
		for j := i; j < len(v); j++ {
			var dot float64
			for l := range v[i] {
				dot += v[i][l] * v[j][l]
			}
			want := 0.0
			if i == j {
				want = 1
			}
			if math.Abs(dot-want) > 1e-6 {
				return fmt.Errorf("eigenvectors %d and %d are not orthonormal (dot product %g)", i, j, dot)
			}
		}
	}
	return nil
}

func checkBands(bands []Band) error {
	for j, bd := range bands {
		switch {
		case bd.Index < 1:
			return fmt.Errorf("band %d: index %d is not 1-based", j+1, bd.Index)
		case bd.NoData != nil && math.IsInf(*bd.NoData, 0):
			return fmt.Errorf("band %d: nodata %v is infinite (NaN or a finite value is accepted)", j+1, *bd.NoData)
		case !finite(bd.Scale) || bd.Scale == 0 || !finite(bd.Offset):
			return fmt.Errorf("band %d: scale %v and offset %v", j+1, bd.Scale, bd.Offset)
		case !finite(bd.Min) || !finite(bd.Max) || bd.Min > bd.Max:
			return fmt.Errorf("band %d: valid range [%v, %v]", j+1, bd.Min, bd.Max)
		}
	}
	return nil
}

func checkFinite(name string, x []float64) error {
	for i, v := range x {
		if !finite(v) {
			return fmt.Errorf("%s[%d] is %v", name, i, v)
		}
	}
	return nil
}

func checkVector(name string, x []float64, p int) error {
	if len(x) != p {
		return fmt.Errorf("%s has %d elements for %d bands", name, len(x), p)
	}
	return checkFinite(name, x)
}

func checkMatrix(name string, m [][]float64, p int) error {
	if len(m) != p {
		return fmt.Errorf("%s has %d rows for %d bands", name, len(m), p)
	}
	for i, row := range m {
		if err := checkVector(fmt.Sprintf("%s[%d]", name, i), row, p); err != nil {
			return err
		}
	}
	return nil
}

// Source returns the path of the first input the basis was fitted on, or
// "basis" when it records none; a short name for titles and messages.
func (b *Basis) Source() string {
	if len(b.Inputs) == 0 {
		return "basis"
	}
	return b.Inputs[0].Path
}

// scale returns s_j, the scale of band j in b's folding: 1 in covariance mode,
// the band standard deviation in correlation mode.
func (b *Basis) scale(j int) float64 {
	if b.Mode == Correlation {
		return b.StdDev[j]
	}
	return 1
}
