package cli

// The long help texts of bandfold's commands ("bandfold COMMAND --help").
// The README documents the same behaviour at more length.
const (
	// ChangeHelp is the help of the change command.
	ChangeHelp = `change projects both dates onto principal components (fitted on the pixels
valid on both dates, or from --basis), takes the differences of the scores,
normalises AFTER onto BEFORE's radiometric scale over stable pixels
(--normalize), estimates the no-change distribution of those differences robustly (location
and covariance, iteratively trimmed), and maps the pixels whose Mahalanobis
statistic Z exceeds the threshold. Small patches are removed with GDAL's
sieve filter (--min-area), patches are polygonized into a GeoPackage, and
areas are ground areas on the CRS's ellipsoid.

Outputs in DIR: change.tif (1 change, 0 no change, 255 nodata), magnitude.tif
(Z), pvalue.tif (with --pvalues: the no-change p-value of Z, the chi-square
survival function with k degrees of freedom), differences.tif (with
--differences), changes.gpkg (layer "changes"), preview.png (before and after side by side),
diagnostics.png (Z against the chi-square fit), summary.json and the folder's
manifest. --overwrite replaces only a previous change output.

`
	// DemoHelp is the help of the demo command.
	DemoHelp = `demo writes an invented scenario: the Vessel river catchment, a fictional
place seen on two dates a year apart by an 8-band multispectral sensor at 10 m
(with a forest clearing, a growing reservoir and a burn scar between the
dates, and their truth mask), by a 120-band hyperspectral sensor at 30 m, and
once a year on five dates (a one-date cloud, then a clearing and a burn that
last). It then runs bandfold's jobs on it, prints each series event's true
date beside the date timeline found, and lists where every output lies.`
	// DenoiseHelp is the help of the denoise command.
	DenoiseHelp = `denoise projects every pixel onto the k leading components of the basis and
back, without writing the components. With an MNF basis (learn --method mnf)
this is minimum noise fraction noise removal, x = mean + S_N A_k A_k^T (x - mean).
` + BasisBandsHelp
	// BasisBandsHelp says how commands that read a basis choose the bands.
	BasisBandsHelp = `Without --bands, the bands the basis was fitted on (learn --bands and
--exclude) are taken from IMAGE by their numbers in the stack the basis was
fitted on; an IMAGE holding just those bands, with the same band names or
wavelengths, is taken whole.`
	// FoldHelp is the help of the fold command.
	FoldHelp = `fold projects every valid pixel onto the leading components of a basis,
y = W_k^T ((x - mean) / s), tile by tile in parallel, and writes the scores as
a georeferenced raster. Invalid pixels become nodata.

` + BasisBandsHelp + `

With a basis fitted on another scene, fold reports the share of this scene's
variance the kept components explain next to the share on the fitting scene;
a large drop means the basis no longer fits and should be refitted.

Many scenes (arguments, --list, or a glob) go to --out-dir, named by --name.
Outputs that already exist, are complete and were written from the same
inputs and options are skipped, so a rerun after a crash finishes only what
is missing; each is read back to check its values against the checksum
recorded when it was written, and one found damaged (cut short, or changed)
is written again. A failing scene is reported and the rest go on. --shard I/N (or
auto, from a Slurm array or Kubernetes Indexed Job) takes every N-th scene of
the list.`
	// InspectHelp is the help of the inspect command.
	InspectHelp = `inspect prints the variance table of a basis file. With --loadings it also
prints the loadings of the kept components (band x component, the
eigenvectors). With --plots DIR it also writes scree.png (share of variance
per component, the cumulative share, the chosen k and the broken-stick
reference) and loadings.png (band x component loadings of the kept
components on a diverging scale centred on zero). The --json summary always
holds the band names and the kept components' loadings.`
	// LearnHelp is the help of the learn command.
	LearnHelp = `learn accumulates the band covariance of the images tile by tile in bounded
memory, decomposes it, and writes the basis file every other command uses.
Several IMAGE arguments are pooled scenes with the same bands.

With --shard I/N --partial FILE, only every N-th tile (starting at I) is read
and the un-decomposed statistics are written for "bandfold merge".`
	// MergeHelp is the help of the merge command.
	MergeHelp = `merge combines the partial files written by "learn --shard I/N --partial"
and finishes the basis. It refuses a set that is not exactly shards 0..N-1,
once each, of the same inputs, bands, mode, tile size and stride, so a failed
task can never yield a silently wrong basis.`
	// RootHelp is the help of the root command.
	RootHelp = `bandfold fits a principal component basis of multiband and hyperspectral
rasters in bounded memory (band covariance accumulated tile by tile), writes
component images as GeoTIFF, reconstructs bands from a few components with a
measured loss, and maps land-cover change between two dates.

An IMAGE argument is one GDAL-readable raster, or several files on one grid
joined with commas ("b2.tif,b3.tif,b4.tif"), stacked in that order as one
image, or a STAC item (its JSON file or http(s) URL; --assets picks and
orders its assets). A pixel counts only when it is valid in every selected
band.`
	// SynthHelp is the help of the synth command.
	SynthHelp = `synth writes an invented cube: a few latent spectra mixed with smooth
abundance fields plus noise, so its principal components behave like those of
real imagery. The output is a tiled, uncompressed GeoTIFF.`
	// TimelineHelp is the help of the timeline command.
	TimelineHelp = `timeline scores every consecutive pair of dates exactly as change does (one
basis for the series, each pair's own no-change model, threshold and minimum
mapping unit) and confirms a flag when the new state lasts and is not a
return (see the README). Outputs in DIR: first-change.tif, last-change.tif,
change-count.tif, max-magnitude.tif, steps.tif, changes.gpkg, timeline.json,
timeline.png, first-change.png and report.html.

`
	// UnfoldHelp is the help of the unfold command.
	UnfoldHelp = `unfold rebuilds every band from the component scores, x = mean + s (W_k y),
and writes them in the original bands' type (rounded and clamped to its
range), or as float32/float64.

With --compare ORIGINAL (same grid and bands; --bands, --nodata and --mask
apply to it) it reports the loss: RMSE overall and per band, on the
unrounded reconstruction and on the values written, PSNR per band (peak =
max - min of the original's valid values), the mean spectral angle, the
largest absolute error, and the compression ratio against a lossless DEFLATE
copy of the original.`
)
