package fold

import (
	"context"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strconv"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/transform"
)

// Budget is an error budget for fold: the overall RMSE over valid pixels and
// bands, in the data's units after scale/offset, that the component image
// must meet when rebuilt.
type Budget struct {
	// Kind is BudgetRMSE (Value is the RMSE), BudgetNoise (the RMSE is the
	// root mean square of the basis's per-band noise standard deviations)
	// or BudgetPSNR (Value is the least PSNR in dB, with peak the largest
	// band range recorded in the basis); "" means no budget.
	Kind  string
	Value float64
}

// Budget kinds.
const (
	BudgetRMSE  = "rmse"
	BudgetNoise = "noise"
	BudgetPSNR  = "psnr"
)

func (b Budget) set() bool { return b.Kind != "" }

// String names the budget as its flag.
func (b Budget) String() string {
	switch b.Kind {
	case BudgetNoise:
		return "--max-rmse noise"
	case BudgetPSNR:
		return "--min-psnr " + strconv.FormatFloat(b.Value, 'g', -1, 64)
	}
	return "--max-rmse " + strconv.FormatFloat(b.Value, 'g', -1, 64)
}

// BudgetReport is what a budgeted fold predicted and achieved.
type BudgetReport struct {
	// BudgetRMSE is the budget as an RMSE; PredictedRMSE the allocation's
	// prediction on the fitting scene; AchievedRMSE the RMSE measured while
	// writing, of the bands rebuilt from the codes written against the
	// input, and AchievedPSNR its PSNR with peak PSNRPeak (nil for a zero
	// error).
	BudgetRMSE    float64  `json:"budget_rmse"`
	PredictedRMSE float64  `json:"predicted_rmse"`
	AchievedRMSE  float64  `json:"achieved_rmse"`
	AchievedPSNR  *float64 `json:"achieved_psnr_db"`
	PSNRPeak      float64  `json:"psnr_peak"`
	// Step is the quantisation step Δ of every component's codes (the
	// bands' GDAL scale); Attempts the number of writes (a write that
	// misses the budget is repeated with a finer step, at most twice).
	Step     float64 `json:"step"`
	Attempts int     `json:"attempts"`
	// BytesWritten is the size of the component image; CompressionRatio
	// the lossless DEFLATE copy of the input (OriginalDeflateBytes) against
	// the component image plus the basis file, as unfold --compare states
	// it. Making that copy of a large input costs several times the fold
	// (it compresses every value at DEFLATE level 6), so above
	// deflateSample bytes of values its size is estimated from a
	// systematic sample of the units its blocks are made of, compressed
	// with the same creation options (raster.EstimateDeflateSize):
	// OriginalDeflateSampled is the share compressed (1: the copy was
	// made, the size exact) and OriginalDeflateStdErr the standard error
	// of the estimate in bytes. unfold --compare always makes the copy.
	BytesWritten           int64    `json:"bytes_written"`
	OriginalDeflateBytes   int64    `json:"original_deflate_bytes"`
	OriginalDeflateSampled float64  `json:"original_deflate_sampled"`
	OriginalDeflateStdErr  float64  `json:"original_deflate_stderr_bytes"`
	BasisBytes             int64    `json:"basis_bytes"`
	CompressionRatio       *float64 `json:"compression_ratio"`
}

// deflateSample is the number of bytes of input values above which the
// lossless reference of a budgeted fold is estimated from a sample rather
// than made whole: about 0.15 s of DEFLATE on the 2-core reference
// machine.
const deflateSample = 4 << 20

// budgetPlan is the allocation of one write: the step, the code type and
// the budget it must meet.
type budgetPlan struct {
	budget, predicted float64 // RMSE
	step              float64
	code              transform.CodeType
	attempt           int
}

// maxAttempts is the number of writes of a scene before a missed budget is
// an error: the first and two with finer steps.
const maxAttempts = 3

// prepareBudget checks a budgeted fold's options, reads the basis and
// allocates the components and the step (transform.Allocate).
func prepareBudget(env jobkit.Env, o *FoldOptions) (*folding, error) {
	bg := o.Budget
	switch {
	case bg.Kind != BudgetRMSE && bg.Kind != BudgetNoise && bg.Kind != BudgetPSNR:
		return nil, jobkit.Usagef("budget kind %q: want rmse, noise or psnr", bg.Kind)
	case bg.Kind != BudgetNoise && !(bg.Value > 0 && !math.IsInf(bg.Value, 0)):
		return nil, jobkit.Usagef("%s: the budget must be a positive number", bg)
	case o.Components != 0:
		return nil, jobkit.Usagef("%s with --components: the budget chooses the components", bg)
	case o.Type != "":
		return nil, jobkit.Usagef("%s with --type: the budget chooses the integer type of the codes", bg)
	}
	if why := lossyCreation(o.Format, o.CreationOptions); why != "" {
		return nil, jobkit.Usagef("%s with --co: %s, so the file would not hold the codes whose error the budget proves; a budget takes lossless compression only (for example COMPRESS=ZSTD, or LERC with MAX_Z_ERROR=0)", bg, why)
	}
	b, err := o.readBasis()
	if err != nil {
		return nil, err
	}
	plan, err := allocateBudget(b, bg, o.Basis)
	if err != nil {
		return nil, err
	}
	k := b.Components
	proj, err := transform.NewProjector(b, k)
	if err != nil {
		return nil, fmt.Errorf("basis %s: %w", o.Basis, err)
	}
	if o.Input, err = o.Input.WithBasis(b, o.Basis); err != nil {
		return nil, err
	}
	return &folding{env: env, o: o, basis: b, proj: proj, k: k, dtype: plan.code.Name, format: o.Format, plan: plan}, nil
}

// allocateBudget turns the budget into an RMSE and allocates for it; it sets
// b.Components to the kept count.
func allocateBudget(b *transform.Basis, bg Budget, path string) (*budgetPlan, error) {
	rmse := bg.Value
	switch bg.Kind {
	case BudgetNoise:
		noise, err := b.NoiseRMS()
		if err != nil {
			return nil, jobkit.Usagef("--max-rmse noise: %s has no noise estimate (learn it with --method mnf, or state --max-rmse as a number)", path)
		}
		rmse = noise
	case BudgetPSNR:
		// PSNR = 20 log10(peak / RMSE).
		rmse = b.PeakRange() * math.Pow(10, -bg.Value/20)
	}
	if !(rmse > 0) {
		return nil, jobkit.Usagef("%s: the budget is an RMSE of %g, which no lossy storage can meet; store the original losslessly", bg, rmse)
	}
	v, g, p := b.BudgetVariances(), b.BudgetGains(), len(b.Bands)
	target := rmse * rmse * (1 - transform.BudgetMargin)
	a, err := transform.Allocate(v, g, p, target, b.MinCodeStep())
	if errors.Is(err, transform.ErrBudgetTooSmall) {
		return nil, jobkit.Usagef("%s (an RMSE of %.4g): %v; store the original losslessly instead", bg, rmse, err)
	} else if err != nil {
		return nil, jobkit.Usage(fmt.Errorf("%s: %w", bg, err))
	}
	if a.Components == 0 {
		// Dropping everything would meet the budget; keep the first
		// component at the coarsest step its variance allows.
		a.Components, a.Step = 1, math.Sqrt(12*v[0])
		a.PredictedMSE = transform.Predict(v, g, p, 1, a.Step)
	}
	b.Components = a.Components
	code, err := b.ChooseCodeType(a.Components, a.Step)
	if err != nil {
		return nil, jobkit.Usagef("%s (an RMSE of %.4g): below what integer codes of the components can reach (%v); store the original losslessly instead", bg, rmse, err)
	}
	return &budgetPlan{budget: rmse, predicted: math.Sqrt(a.PredictedMSE), step: a.Step, code: code, attempt: 1}, nil
}

// achievedRMSE is the RMSE of the bands rebuilt from the codes written over
// the valid pixels and p bands.
func (st *foldStats) achievedRMSE(p int) float64 {
	return rmseOf(st.sse, st.x.Count()*float64(p))
}

// finer returns the plan of the next write after one that achieved the
// RMSE achieved > budget: the step shrunk by the measured ratio
// budget/achieved, times √(1 − BudgetMargin) so that the rewrite aims below
// the budget as the first write did.
func (pl *budgetPlan) finer(b *transform.Basis, k int, achieved float64) (*budgetPlan, error) {
	next := *pl
	next.attempt++
	next.step = pl.step * pl.budget / achieved * math.Sqrt(1-transform.BudgetMargin)
	var err error
	if next.code, err = b.ChooseCodeType(k, next.step); err != nil {
		return nil, err
	}
	return &next, nil
}

// apply sets the storage of the codes in spec: the code type with its
// minimum as nodata, scale Δ and offset 0 on every band, and the best
// lossless compression with the integer predictor.
func (pl *budgetPlan) apply(spec *raster.Spec) {
	spec.DataType = pl.code.Name
	nd := pl.code.NoData
	spec.NoData = &nd
	spec.Scales, spec.Offsets = make([]float64, spec.Bands), make([]float64, spec.Bands)
	for i := range spec.Scales {
		spec.Scales[i] = pl.step
	}
	spec.Compress = raster.BestCompression()
	spec.Metadata["BANDFOLD_STEP"] = strconv.FormatFloat(pl.step, 'g', -1, 64)
	spec.Metadata["BANDFOLD_BUDGET_RMSE"] = strconv.FormatFloat(pl.budget, 'g', -1, 64)
}

// write creates out and folds s into it. With a budget, the error of the
// codes written is measured in the same pass; a write that misses the
// budget is discarded and repeated with a finer step, at most twice more,
// and a last miss is an error naming both numbers, with nothing left
// behind.
func (f *folding) write(ctx context.Context, s *raster.Stack, out string, overwrite bool) (*raster.Output, foldStats, error) {
	plan := f.plan
	for {
		spec := f.spec(s)
		spec.Overwrite = overwrite
		if plan != nil {
			plan.apply(&spec)
		}
		dst, err := raster.Create(out, spec)
		if err != nil {
			return nil, foldStats{}, err
		}
		stats, err := f.project(ctx, s, dst, &spec, plan)
		if err != nil || plan == nil || stats.x.Count() == 0 {
			return dst, stats, err
		}
		achieved := stats.achievedRMSE(s.Len())
		if achieved <= plan.budget {
			return dst, stats, nil
		}
		dst.Abort()
		if plan.attempt == maxAttempts {
			return nil, stats, fmt.Errorf("%s: the achieved RMSE %.6g exceeds the budget %.6g (%s) after %d writes, the last at step %.4g: the basis fits this scene too poorly for the budget; refit the basis on it or raise the budget",
				jobkit.Describe(s), achieved, plan.budget, f.o.Budget, maxAttempts, plan.step)
		}
		f.env.Logger().Info(fmt.Sprintf("%s: achieved RMSE %.6g above the budget %.6g at step %.4g: writing again with a finer step", jobkit.Describe(s), achieved, plan.budget, plan.step))
		next, err := plan.finer(f.basis, f.k, achieved)
		if err != nil {
			return nil, stats, fmt.Errorf("%s: the achieved RMSE %.6g exceeds the budget %.6g and a finer step is %w", jobkit.Describe(s), achieved, plan.budget, err)
		}
		plan = next
	}
}

// reportBudget fills the budget figures of a finished (not yet committed)
// budgeted fold: the achieved error, the bytes and the compression ratio.
func (f *folding) reportBudget(res *FoldScene, stats foldStats, dst *raster.Output, s *raster.Stack) error {
	plan := stats.plan
	if plan == nil {
		return nil
	}
	r := &BudgetReport{BudgetRMSE: plan.budget, PredictedRMSE: plan.predicted, AchievedRMSE: stats.achievedRMSE(s.Len()),
		PSNRPeak: f.basis.PeakRange(), Step: plan.step, Attempts: plan.attempt}
	if ps := transform.PSNR(r.AchievedRMSE*r.AchievedRMSE, r.PSNRPeak); !math.IsInf(ps, 0) && !math.IsNaN(ps) {
		r.AchievedPSNR = &ps
	}
	res.Type = plan.code.Name
	var err error
	if r.BytesWritten, err = fileSize(dst.Temp()); err != nil {
		return err
	}
	if r.BasisBytes, err = fileSize(f.o.Basis); err != nil {
		return err
	}
	var variance float64
	r.OriginalDeflateSampled = 1
	for _, p := range s.Paths {
		ref, err := raster.EstimateDeflateSize(p, filepath.Dir(dst.Temp()), deflateSample)
		if err != nil {
			return err
		}
		r.OriginalDeflateBytes += ref.Bytes
		r.OriginalDeflateSampled = min(r.OriginalDeflateSampled, ref.Sampled)
		variance += ref.StdErr * ref.StdErr
	}
	r.OriginalDeflateStdErr = math.Sqrt(variance)
	if total := r.BytesWritten + r.BasisBytes; total > 0 {
		ratio := float64(r.OriginalDeflateBytes) / float64(total)
		r.CompressionRatio = &ratio
	}
	res.BudgetReport = r
	return nil
}

// encode stores the codes round(y/Δ) of a tile's valid scores in ft.out
// (nodata elsewhere) and accumulates in ft.sse the squared error of the
// bands rebuilt from them, x̂ = unfold(codes x Δ), against the input x,
// without rebuilding them (transform.ErrorMeter).
func (w *foldWorker) encode(ft *foldTile, x []float64, valid []bool) {
	pl := w.plan
	k := w.k
	z := w.meter.Cross(x, ft.out)
	var buf [maxCodeComponents]float64
	yh := buf[:min(k, len(buf))]
	if k > len(buf) {
		yh = make([]float64, k)
	}
	ft.sse = 0
	for i, ok := range valid {
		px := ft.out[i*k : i*k+k]
		if !ok {
			for c := range px {
				px[c] = pl.code.NoData
			}
			continue
		}
		// z may be the scores themselves: measure before storing codes.
		for c, v := range px {
			yh[c] = pl.code.Code(v, pl.step) * pl.step
		}
		ft.sse += w.meter.Squared(ft.sq[i], z[i*k:i*k+k], yh)
		for c, v := range px {
			px[c] = pl.code.Code(v, pl.step)
		}
	}
}

// maxCodeComponents is the number of components whose rebuilt scores
// encode keeps on the stack.
const maxCodeComponents = 64

// rmseOf is the root mean square of a sum of squares over values band values.
func rmseOf(sse transform.Sum, values float64) float64 {
	return math.Sqrt(sse.Value() / values)
}
