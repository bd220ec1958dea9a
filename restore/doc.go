// Package restore holds tessera's restoration pipelines and the protocol
// that measures them.
//
//   - Denoise: K-SVD denoising, M. Elad, M. Aharon, "Image denoising via
//     sparse and redundant representations over learned dictionaries",
//     IEEE Trans. Image Processing 15(12), 2006: a dictionary trained on the
//     noisy image's own patches, every overlapping patch coded by OMP to
//     ε = n·(C·σ)², and the weighted average back of their eq. 21.
//     Colour images are coded per channel in an orthonormal opponent space
//     by default (measured better here than the joint RGB patches of
//     J. Mairal, M. Elad, G. Sapiro, IEEE TIP 17(1), 2008, also available).
//   - Inpaint: iterated DCT thresholding with the known pixels reset
//     (O. G. Guleryuz, IEEE TIP 15(3), 2006) for noise-free frames, or the
//     method of Mairal, Elad & Sapiro (2008): masked K-SVD and OMP
//     restricted to the observed pixels (Options.Fill).
//   - DenoisePhoton: photon-limited frames through the generalized Anscombe
//     transform and its closed-form unbiased inverse (M. Mäkitalo, A. Foi,
//     IEEE TIP 22(1), 2013).
//   - AddNoise and BenchCase: the Kodak protocol, so that every figure of
//     the project means the same thing.
//
// Sub-packages: quality (PSNR, SSIM), noise (σ and photon-model
// estimation, the Anscombe transforms).
//
// Restored images are estimates, not measurements.
package restore
