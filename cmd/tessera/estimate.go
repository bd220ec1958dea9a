package main

import "tessera/restore/noise"

// estimateSigma gives the noise σ of each channel of an image, in the
// image's units; it is used when --sigma is omitted. A colour image is
// denoised with the root mean square of its channels' estimates: its
// patches are coded jointly, and n·(C·σ)² with that σ is the expected
// noise energy of a joint patch.
var estimateSigma = noise.EstimateAll
