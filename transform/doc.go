// Package transform owns bandfold's principal component basis and everything
// computed from it without touching a raster:
//
//   - the eigen-decomposition of a band covariance or correlation matrix
//     (Decompose), the shares of variance (Explained, Cumulative, and
//     ExplainedOn for a scene folded with a basis) and the rules for how many
//     components to keep (ComponentsFor, BrokenStick with BrokenStickShares,
//     KaiserCount);
//   - the versioned JSON files: the basis (Basis, "bandfold-basis") and the
//     un-decomposed statistics written by one cluster shard (Partial,
//     "bandfold-partial"), with CheckSet to verify that a set of partials is
//     one whole job and Combine to merge their statistics. Marshal gives a
//     file's bytes and ReadBasis and ReadPartial read one back, refusing a
//     basis whose numbers contradict each other; writing files is the
//     caller's;
//   - the projection of pixels onto the leading components and back
//     (Projector.Fold and Projector.Unfold), and of band differences between
//     two dates onto score differences (Projector.Difference);
//   - the loss of a reconstruction (Loss, LossReport, SpectralAngle, PSNR);
//   - the Int16 storage of component scores (Int16Scaling, QuantizeInt16)
//     and the storage of reconstructed bands (Storage).
//
// Band statistics are accumulated tile by tile by package bands; reading and
// writing images is done elsewhere. This package is pure Go on top of gonum,
// and its matrix products go through blas64, so a faster BLAS registered with
// blas64.Use is picked up.
//
// Pixel blocks are pixel-major (band interleaved by pixel): n pixels of p bands
// are a []float64 of length n·p whose element i·p+j is band j of pixel i.
// Component scores are laid out the same way, n·k values for k components.
//
// Functions panic, with a "transform: " prefix, on programmer errors such as
// mismatched slice lengths; problems with data (non-finite statistics, a
// malformed or foreign file, a component count out of range) are returned as
// errors.
package transform
