package noise

import (
	"fmt"

	"tessera/patches"
)

func checkChannel(img *patches.Image, c int) {
	if c < 0 || c >= img.C {
		panic(fmt.Sprintf("noise: channel %d of a %d-channel image", c, img.C))
	}
}
