package restore

import (
	"tessera/learn"
	"tessera/restore/internal/testkit"
)

// The shared helpers live in restore/internal/testkit.
var (
	sharedPath = testkit.SharedPath
	loadPNG    = testkit.LoadPNG
	kodakGray  = testkit.KodakGray
	centreCrop = testkit.CentreCrop
	psnr       = testkit.PSNR
)

func newTestRand() interface{ NormFloat64() float64 } { return learn.NewRand(99) }
