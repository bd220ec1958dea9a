package main

import (
	"strings"

	"github.com/urfave/cli/v2"
)

// Method names, as --method takes them and the reports print them.
const (
	methodLearned = "ksvd"  // K-SVD on each image, every patch coded alone
	methodDCT     = "dct"   // the same coding with the fixed DCT (bench only)
	methodGroup   = "group" // similar patches grouped and coded jointly
)

var methodFlag = &cli.StringFlag{Name: "method", Value: methodLearned,
	Usage: "denoising method `ksvd|group`: ksvd codes each patch alone over a dictionary learned from the image; group codes similar patches together (better by 0.3–0.5 dB on the Kodak set, 2.5–3× slower)"}

// parseMethod reads --method.
func parseMethod(s string) (string, error) {
	switch m := strings.ToLower(strings.TrimSpace(s)); m {
	case methodLearned, methodGroup:
		return m, nil
	}
	return "", usagef("--method %q: unknown method; choose ksvd (the default) or group", s)
}
