package restore

import (
	"fmt"

	"tessera/patches"
)

// HarmonicFill fills the missing pixels of every channel with the solution
// of Laplace's equation, the known pixels as boundary values: the baseline
// the inpainting protocol measures Inpaint against, and Inpaint's own first
// guess.
func HarmonicFill(img *patches.Image, missing []bool) (*patches.Image, error) {
	if len(missing) != img.W*img.H {
		return nil, &OptionError{"mask", fmt.Sprintf("the mask has %d pixels, the image %d×%d", len(missing), img.W, img.H)}
	}
	return harmonicStart(img, missing), nil
}
