// Package learn holds the sparse-coding core of tessera: dictionaries,
// orthogonal matching pursuit and K-SVD.
//
// Sources:
//   - OMP is computed as Batch-OMP: R. Rubinstein, M. Zibulevsky, M. Elad,
//     "Efficient implementation of the K-SVD algorithm using batch orthogonal
//     matching pursuit", Technion CS-2008-08 (2008).
//   - K-SVD: M. Aharon, M. Elad, A. Bruckstein, "K-SVD: An algorithm for
//     designing overcomplete dictionaries for sparse representation",
//     IEEE Trans. Signal Processing 54(11), 2006.
//   - The overcomplete DCT start and the denoising use: M. Elad, M. Aharon,
//     "Image denoising via sparse and redundant representations over learned
//     dictionaries", IEEE Trans. Image Processing 15(12), 2006.
//   - Masked coding for missing pixels: J. Mairal, M. Elad, G. Sapiro,
//     "Sparse representation for color image restoration",
//     IEEE Trans. Image Processing 17(1), 2008.
//
// The package knows nothing of images or files: signals are float64 vectors.
package learn
