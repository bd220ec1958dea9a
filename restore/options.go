package restore

import (
	"tessera/learn"
)

// ColorMode says how multi-channel images are coded.
type ColorMode int

const (
	// ColorJoint codes R, G and B of a patch together (n = 3p²), as in
	// Mairal, Elad & Sapiro (2008).
	ColorJoint ColorMode = iota
	// ColorSeparate codes each channel alone in a decorrelated (YCbCr) space.
	ColorSeparate
)

// Stage is one progress report of a restoration.
type Stage struct {
	// Name is "train" while the dictionary is learned, "code" while every
	// patch is coded and averaged back.
	Name string
	// Round and Rounds count K-SVD rounds during "train".
	Round, Rounds int
	// Done and Total count patch rows during "code".
	Done, Total int
}

// Options of a denoising run. Build them with Defaults and change fields.
// FillMethod is a method of Inpaint.
type FillMethod int

const (
	// FillAuto is FillTransform for noise-free images without a given
	// dictionary, FillDictionary otherwise.
	FillAuto FillMethod = iota
	// FillTransform is iterated thresholding in the fixed 2-D DCT; it
	// keeps the known pixels and takes no noise level.
	FillTransform
	// FillDictionary is masked K-SVD and OMP (Mairal, Elad & Sapiro 2008);
	// it can denoise the known pixels too.
	FillDictionary
)

type Options struct {
	Patch   int     // patch side p
	Atoms   int     // dictionary size K
	Rounds  int     // K-SVD rounds J; 0 with Dict set means no training
	Bound   float64 // C in ε = n·(C·σ)²
	Train   int     // training patches sampled from the image
	Stride  int     // patch stride when coding (1 = every patch)
	Seed    uint64
	Workers int // goroutines; results do not depend on it
	// Lambda is the weight of the noisy image in the average back, on the
	// 0–255 scale: 0 means the published 30/σ.
	Lambda float64
	Color  ColorMode
	// Passes is the number of passes of Inpaint over the holes (0: 5).
	Passes int
	// Fill chooses Inpaint's method.
	Fill FillMethod
	// Dict, when set, is the starting dictionary (instead of the DCT); with
	// Rounds = 0 it is used as it is.
	Dict *learn.Dict
	// Progress, when set, is called from the calling goroutine's side at each
	// stage change. It must be cheap.
	Progress func(Stage)
}

// Result describes a finished restoration.
type Result struct {
	Dict *learn.Dict // the dictionary used for coding
	// MeanAtoms is the mean number of atoms per coded patch.
	MeanAtoms float64
}
