// Package bands owns the per-band statistics of multiband raster pixels: the
// valid-pixel count, the band means, the co-moment matrix (from which the
// covariance and correlation matrices and the standard deviations follow) and
// the per-band minimum and maximum.
//
// An Accumulator gathers these in memory proportional to p², for p bands,
// plus at most about 2 MiB of scratch, however many pixels it sees. Pixels arrive in pixel-major blocks (p
// consecutive values per pixel) with an optional validity mask; the caller
// decides what is valid (nodata, masks, NaN) and how blocks are read. The
// package does no I/O and starts no goroutines: callers that work on tiles in
// parallel give each worker its own Accumulator and Merge them in tile order,
// which makes the result independent of the number of workers.
//
// State is the plain form of an Accumulator that can be written as JSON, so
// that shards of a job can each write a partial result and a later step can
// combine them with FromState and Merge.
//
// # Numerical method
//
// Each block of pixels (a call of AddPixels, cut into cache-sized chunks) is
// first reduced on its own. The k valid pixels are copied once, less the
// block's first valid pixel r, with a 1 appended: one symmetric rank-k
// update of that k×(p+1) matrix [C 1] with blas64.Syrk gives CᵀC, the sums
// s = Cᵀ1 and k, so mean = r + s/k and the co-moment M = CᵀC − s·sᵀ/k.
// Since r is one of the pixels, the correction cancels at most about
// log2(k) bits of CᵀC; where it would cancel more than a few, the block is
// centred on its mean and the update taken again. A faster BLAS registered
// with blas64.Use (see the sub-package openblas) is used automatically.
// Only for a handful of bands and with gonum's native BLAS, which a fused Go
// loop beats there, is the loop used instead (mean first, then centred
// cross-products). The block is then folded into the running state with the
// pairwise update of Chan, Golub and LeVeque:
//
//	n = nA + nB
//	d = meanB − meanA
//	mean = meanA + d·nB/n
//	M = MA + MB + d·dᵀ·nA·nB/n
//
// Because no raw sums of squares are ever formed, the result does not lose
// precision when the data sit on a large offset (for example radiances or
// digital numbers far from zero).
//
// # Exact sums
//
// An accumulator made with NewExactAccumulator instead keeps, for as long
// as every value is an integer of magnitude at most MaxExact (16-bit
// digital numbers and their differences), the count, the sums and the sums
// of products as 128-bit integers. Each chunk's product [X 1]ᵀ[X 1] comes
// from the same Syrk, unshifted: its terms are integers below 2³⁵ and a
// chunk holds at most 2¹⁷ pixels, so every partial sum stays below 2⁵³ and
// the product is exact whatever order the BLAS adds in. Merging adds the
// integers; the mean and the co-moment M = (n·P − s·sᵀ)/n are derived once,
// correctly rounded, with math/big. The statistics are then the same bit for
// bit for any cut into chunks, tiles or shards and any merge order. At the
// first chunk with another value the accumulator switches, for good, to the
// method above.
//
// # Integer kernel
//
// AddInt16Tile and AddInt16Window (and AddInt16Pairs, the shift
// differences across the edge of two tiles) take integer pixels
// band-sequentially (each band's values of a tile consecutive, as int16
// plus a per-band shift: 8-bit data as they are, unsigned 16-bit data less
// 32768) and form the same exact sums in integer arithmetic. Each band of the tile is
// centred on the middle of its range, c = ⌊(min+max)/2⌋, which brings it
// within ±32767 when its values span at most 65534; chunks of about 512
// KiB of the centred rows, with a row of validity flags (0 or 1, giving the
// count and the sums as the 1s of [X 1] do above), are multiplied in 4×4
// blocks of band pairs: AVX-512 VNNI's vpdpwssd or AVX2's vpmaddwd add two
// int16 products into each int32 lane a step. A lane takes at most s steps
// before it is added into int64, s the largest with 2·s·mᵢ·mⱼ ≤ 2³¹ − 1 for
// the block's largest centred magnitudes mᵢ, mⱼ, so it cannot overflow
// (s = 1 at ±32767); or, where that is fewer than the chunk's steps, the
// whole chunk if Qᵢ·Qⱼ ≤ (2³¹ − 1)², Qᵢ and Qⱼ the largest sums of squares
// of a lane of the two blocks' rows over the chunk, which bound every
// partial sum of the lane's products (Cauchy–Schwarz): typical data sit
// far inside their range. The sixteen accumulators of a block are reduced
// into int64 together. The centring is undone exactly in integers and the
// sums added to the 128-bit ones. A tile whose values do not fit (a band
// spanning more than 65534, or beyond ±MaxExact), and any tile added to an
// ordinary accumulator, goes through AddPixels instead.
//
// AddInt16Window pairs the columns of a window as AddWindow does: the
// rows s = a + b and d = b − a of the pixels a, b of columns 2j and 2j+1
// and the next differences c − b (c of column 2j+2) are packed from the
// same chunk of the window into three chunks of the kernel, and half the
// sum of the products of s and d gives the pixels' own (three products of
// n/2 rows instead of two of n), where every band's values span at most
// 32767, so that the sums, centred, fit int16; other windows take a pass
// for the pixels and one for the differences.
//
// The kernel is C, through cgo: AVX2 and AVX-512 VNNI paths each compiled
// with a function-level target attribute, so that the package builds with
// the ordinary compiler flags and runs on any x86-64 CPU; the path is
// chosen at run time from the CPU's features (cpuid, through
// golang.org/x/sys/cpu, which also checks that the operating system saves
// the vector registers). The scalar path, in Go, is the reference the
// SIMD paths are tested against; CPUs without AVX2, builds without cgo and
// other architectures send integer tiles to AddPixels instead, which with
// a BLAS is several times faster than scalar integer products. C rather than Go assembly: the compiler
// allocates the 24 vector registers of a 4×4 block and vectorises the
// packing loops, and intrinsics keep the kernel readable.
//
// Reference: T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and
// a pairwise algorithm for computing sample variances", Technical Report
// STAN-CS-79-773, Stanford University, 1979.
package bands
