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
//   - A second stage (Params.Second), by default the second step of Dabov
//     et al. 2007 with this method's first estimate as the pilot: groups
//     found again on the estimate, each filtered by empirical Wiener
//     shrinkage in the 2-D DCT of its patches and a Walsh–Hadamard
//     transform across them, the patches put back weighted by 1/‖W‖²
//     (SecondCollab). The other second passes: regrouping on the first
//     estimate and coding the noisy image (Mairal et al. 2009); iterative
//     regularisation y₂ = x̂ + δ(y − x̂) at a reduced σ (Dong, Zhang, Shi &
//     Li 2013, "Nonlocally centralized sparse representation for image
//     restoration"; the σ₂ rule is common practice in that family); and a
//     collaborative Wiener step on the supports found on the first
//     estimate with the learned atoms as the patch transform.
//   - Fill, for noise-free images with missing pixels: iterated hard
//     thresholding in that 3-D transform with back-projection of the known
//     pixels and a falling threshold (Egiazarian, Foi & Katkovnik 2007,
//     "Compressed sensing image reconstruction via recursive spatially
//     adaptive filtering"; Guleryuz 2006's iterated denoising with a
//     non-local transform), from restore's DCT fill and grouping again on
//     the estimate every few iterations (FillParams).
//
// Settings that restore.Options has no field for are in Params; the
// package benchmark (BenchmarkGroupKodak) measures them against the
// default method on the Kodak protocol (gray; all 24 images or the first
// 6). With DefaultParams the method gains 0.39, 0.50 and 0.57 dB over
// restore.Denoise at σ = 15, 25 and 50 on the 24 images, in 2.9, 4.4 and
// 4.1 times its CPU time (one run, the machine shared); the first pass
// alone, with the earlier 8×8 patches and finer grids, gained 0.33, 0.34
// and 0.45 dB in 2.5 to 2.9 times.
//
// What the defaults rest on, at σ = 25 on 6 images: the SecondCollab
// stage adds 0.11 dB to the first pass; behind it a first pass on 9×9
// patches adds 0.03 dB, a bound scale of 0.83 instead of 0.85 0.01 dB
// (0.8 and 0.87 lose 0.06 and 0.08), and a first window of 25 0.01 dB,
// while a first grid step of 4 instead of 3 and half the training
// patches change nothing measurable. A second window of 39 beats 31 and
// 27 by 0.01 to 0.03 dB; a second step of 2 gains 0.01 dB for much more
// time. Nothing came of second groups of 16 or 64, second patches of 7 or
// 10, a Kaiser window, the principal axes of the estimate's patches in
// place of the DCT, blending the first estimate back in, or σ² scaled in
// the Wiener factors; a repeated Wiener stage lost 0.07 dB. Earlier, on
// three whole images, the other second passes changed the one-pass result
// by −0.52 dB (regrouped on the estimate, noisy image coded), −0.09 dB
// (iterative regularisation) and +0.05 dB (learned-atom Wiener step). For
// the first pass: on 256×256 crops weights of 1/|support| cost 0.08 to
// 0.1 dB against equal weights, the bound scale has a sharp optimum (0.8
// and 0.9 lose 0.1 to 0.7 dB against 0.85 on 8×8 patches), an ℓ0 gain
// rule or a bound lowered per chosen atom in place of the residual bound
// gave nothing or lost 0.1 dB, and the chroma channels of colour images
// coded per channel want a looser bound (0.95); on 6 whole images,
// shrinking each group's codes towards their mean (centralising as Dong
// et al. 2013 do) lost 0.15 dB, and groups of 32, windows of 31, the
// SumSquares rule, a patch weight of 3 and match bounds of 2 or 5 moved
// it by 0.03 dB at most.
package group
