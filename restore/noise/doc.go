// Package noise estimates how noisy an image is and handles photon-limited
// (Poisson–Gaussian) noise.
//
// White Gaussian noise, one standard deviation per channel:
//   - PCA (the default): X. Liu, M. Tanaka, M. Okutomi, "Single-image noise
//     level estimation for blind denoising", IEEE Trans. Image Processing
//     22(12), 2013 — the smallest eigenvalue of the covariance of
//     weak-texture patches, the selection iterated with the estimate,
//     divided by the lower edge 1−√(n/k) of the Marchenko–Pastur law for
//     k patches of n pixels (V. A. Marchenko, L. A. Pastur, "Distribution
//     of eigenvalues for some sets of random matrices", Math. USSR-Sbornik
//     1(4), 1967).
//   - Wavelet: D. L. Donoho, I. M. Johnstone, "Ideal spatial adaptation by
//     wavelet shrinkage", Biometrika 81(3), 1994 — median(|d|)/0.6745 over
//     the finest diagonal db2 detail band (I. Daubechies, "Orthonormal bases
//     of compactly supported wavelets", Comm. Pure Appl. Math. 41, 1988),
//     computed exactly as scikit-image 0.19.3 estimate_sigma does.
//
// Poisson–Gaussian noise, z = α·Poisson(y/α) + N(0, σ²):
//   - GAT: the generalized Anscombe transform of F. Murtagh, J.-L. Starck,
//     A. Bijaoui, "Image restoration with noise suppression using a
//     multiresolution support", Astron. Astrophys. Suppl. 112, 1995, as
//     written in M. Mäkitalo, A. Foi, "Optimal inversion of the generalized
//     Anscombe transformation for Poisson-Gaussian noise", IEEE Trans. Image
//     Processing 22(1), 2013.
//   - InverseGAT: the closed-form approximation of the exact unbiased
//     inverse, M. Mäkitalo, A. Foi, "A closed-form approximation of the exact
//     unbiased inverse of the Anscombe variance-stabilizing transformation",
//     IEEE Trans. Image Processing 20(9), 2011, and its Poisson–Gaussian form
//     in the 2013 paper.
//   - EstimatePoisson: a simplified form of A. Foi, M. Trimeche,
//     V. Katkovnik, K. Egiazarian, "Practical Poissonian-Gaussian noise
//     modeling and fitting for single-image raw-data", IEEE Trans. Image
//     Processing 17(10), 2008 (what differs is listed at the function),
//     with its model of clipped data fitted by the simplex search of
//     J. A. Nelder, R. Mead, "A simplex method for function minimization",
//     Computer Journal 7(4), 1965.
package noise
