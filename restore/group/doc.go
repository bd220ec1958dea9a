// Package group is tessera's second denoising method: non-local group
// sparse coding. Where restore.Denoise codes every patch alone, this
// method gathers, for each reference patch on a grid, its most similar
// patches in a search window and codes each such group on one shared set
// of atoms of a dictionary learned from the image's own groups.
//
// The method and its sources:
//
//   - Grouping by block matching within a window, references on a grid
//     with a step of a few pixels, a bounded number of patches per group
//     and a distance bound (Dabov, Foi, Katkovnik & Egiazarian 2007,
//     "Image denoising by sparse 3-D transform-domain collaborative
//     filtering"); colour images coded per opponent channel are grouped on
//     the luminance channel, as their colour variant does (Dabov et al.
//     2007b, "Color image denoising via sparse 3D collaborative filtering
//     with grouping constraint in luminance-chrominance space"). Distances
//     are box sums of squared differences per window offset, the separable
//     form of the integral-image search.
//   - Simultaneous sparse coding of each group with simultaneous OMP
//     (Tropp, Gilbert & Strauss 2006, "Algorithms for simultaneous sparse
//     approximation. Part I: Greedy pursuit"), as the ℓ0 variant of the
//     learned simultaneous sparse coding of Mairal, Bach, Ponce, Sapiro &
//     Zisserman 2009 ("Non-local sparse models for image restoration"): one
//     support per group, own coefficients per patch, the group's residual
//     bounded by its size times the per-patch bound. The dictionary is
//     trained by K-SVD (Aharon, Elad & Bruckstein 2006) with that coding
//     step on whole groups; see learn.SOMP and learn.KSVDGroups.
//   - The average back with the noisy image weighted by λ = 30/σ (Elad &
//     Aharon 2006); group weights that favour sparse groups (1/number of
//     coefficients, Dabov et al. 2007) are an option (Params.Sparse).
//   - Optional second passes (Params.Second): regrouping on the first
//     estimate and coding the noisy image (Mairal et al. 2009); iterative
//     regularisation y₂ = x̂ + δ(y − x̂) at a reduced σ (Dong, Zhang, Shi &
//     Li 2013, "Nonlocally centralized sparse representation for image
//     restoration"; the σ₂ rule is common practice in that family); and a
//     collaborative Wiener step on the supports found on the first
//     estimate (the second step of Dabov et al. 2007 with the learned
//     atoms as the patch transform).
//
// Settings that restore.Options has no field for are in Params; the
// package benchmark (BenchmarkGroupKodak) measures them against the
// default method on the Kodak protocol. What DefaultParams rests on, in
// that benchmark (gray, 24 images unless said otherwise): the method gains
// 0.33, 0.34 and 0.45 dB over restore.Denoise at σ = 15, 25 and 50 in 2.5
// to 2.9 times its time. On three whole images at σ = 25 the second
// passes changed the one-pass result by −0.52 dB (regrouped on the
// estimate, noisy image coded), −0.09 dB (iterative regularisation) and
// +0.05 dB (Wiener step) for about twice the time, so none is on by
// default. On 256×256 crops, weights of 1/|support| cost 0.08 to 0.1 dB
// against equal weights, the bound scale has a sharp optimum near 0.85
// (0.8 and 0.9 lose 0.1 to 0.7 dB), and the chroma channels of colour
// images coded per channel want a looser bound (0.95).
package group
