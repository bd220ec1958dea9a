package main

import (
	"strings"

	"github.com/urfave/cli/v2"

	"tessera/patches"
	"tessera/restore"
	"tessera/restore/group"
)

// Method names, as --method takes them and the reports print them.
const (
	methodLearned = "ksvd"  // K-SVD on each image, every patch coded alone
	methodDCT     = "dct"   // the same coding with the fixed DCT (bench only)
	methodGroup   = "group" // similar patches grouped and coded jointly
)

var methodFlag = &cli.StringFlag{Name: "method", Value: methodLearned,
	Usage: "denoising method `ksvd|group`: ksvd codes each patch alone over a dictionary learned from the image; group codes similar patches together (better by 0.4–0.6 dB on the Kodak set, 3–4.5× slower)"}

// denoiser is the method's restoration of one image. The group method's
// first stage runs on the 9×9 patches of group.DefaultParams unless
// --patch was given (setPatch): then both its stages take that side.
func denoiser(method string, setPatch bool) restore.Denoiser {
	if method != methodGroup {
		return restore.Denoise
	}
	if !setPatch {
		return group.Denoise
	}
	return func(img *patches.Image, sigma float64, opt restore.Options) (*patches.Image, *restore.Result, error) {
		pr := group.DefaultParams(sigma * 255 / img.Peak())
		pr.Patch = 0
		return group.DenoiseParams(img, sigma, opt, pr)
	}
}

// parseMethod reads --method.
func parseMethod(s string) (string, error) {
	switch m := strings.ToLower(strings.TrimSpace(s)); m {
	case methodLearned, methodGroup:
		return m, nil
	}
	return "", usagef("--method %q: unknown method; choose ksvd (the default) or group", s)
}
