// Package learn holds the jobs that fit and describe a basis: Learn (PCA or
// MNF over one or many scenes, or one shard of them, with the noise
// covariance for MNF), Merge (of shard partials into the basis a single run
// would give) and Inspect (the basis's loadings, variance and rate table,
// with its report).
package learn
