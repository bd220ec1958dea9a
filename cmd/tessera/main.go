// Command tessera restores images with sparse representations over
// dictionaries learned from the images themselves.
package main

import (
	"fmt"
	"os"

	"github.com/urfave/cli/v2"
)

const caution = `Restored images are estimates, not measurements. Keep the originals, and do not
use restored frames for diagnosis, forensics or quantitative measurement
without validating them against your own local practice.`

func newApp() *cli.App {
	return &cli.App{
		Name:  "tessera",
		Usage: "patch-based image restoration with learned sparse dictionaries",
		Description: "tessera cuts images into overlapping patches, learns a dictionary from the\n" +
			"degraded image with K-SVD, codes every patch with orthogonal matching pursuit\n" +
			"to an error bound tied to the noise level, and averages the patches back.\n\n" + caution,
		HideHelpCommand: true,
	}
}

func main() {
	if err := newApp().Run(os.Args); err != nil {
		fmt.Fprintln(os.Stderr, "tessera:", err)
		os.Exit(2)
	}
}
