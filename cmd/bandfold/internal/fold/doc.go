// Package fold holds the jobs that apply a basis: Fold (component images of
// one scene) and FoldBatch (many, resumable), the error budget that chooses
// components and storage for a stated RMSE, PSNR or noise level, Unfold (the
// bands restored from components, with the error measured) and Denoise.
package fold
