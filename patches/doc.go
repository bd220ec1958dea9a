// Package patches cuts images into overlapping square patches and puts
// restored patches back.
//
// Averaging back follows the K-SVD denoising rule of Elad & Aharon (2006,
// IEEE TIP 15(12), eq. 21): every pixel is the weighted mean of the noisy
// pixel (weight λ) and of all restored patches that cover it.
// Patches are produced in bands of rows so that the patches of a whole large
// image are never held at once.
package patches
