// Package quality measures how close a restored image is to its reference.
//
// Sources:
//   - PSNR: 10·log10(peak²/MSE), the mean taken over every pixel and channel;
//     the peak is the largest value of the reference's bit depth.
//   - SSIM: Z. Wang, A. C. Bovik, H. R. Sheikh, E. P. Simoncelli, "Image
//     quality assessment: from error visibility to structural similarity",
//     IEEE Trans. Image Processing 13(4), 2004: 11×11 Gaussian window with
//     σ = 1.5, K1 = 0.01, K2 = 0.03, L = peak, population (co)variances, and
//     the mean taken over the window positions that lie wholly inside the
//     image. These are the settings under which scikit-image 0.19.3
//     structural_similarity(gaussian_weights=True, use_sample_covariance=False)
//     gives the same number.
//   - Luma: ITU-R BT.601, Y = 0.299 R + 0.587 G + 0.114 B. SSIM of a color
//     image is the SSIM of its (unrounded) luma.
package quality
