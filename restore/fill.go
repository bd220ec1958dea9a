package restore

import (
	"math"

	"tessera/patches"
)

// harmonicStart fills the missing pixels of every channel with the
// solution of Laplace's equation, the known pixels as boundary values
// (successive over-relaxation). It is the smooth first guess that the
// sparse passes then refine.
func harmonicStart(img *patches.Image, missing []bool) *patches.Image {
	out := img.Clone()
	w, h, wh := img.W, img.H, img.W*img.H
	var holes []int
	for i, m := range missing {
		if m {
			holes = append(holes, i)
		}
	}
	for c := 0; c < img.C; c++ {
		u := make([]float64, wh)
		pl := out.Plane(c)
		mean, cnt := 0.0, 0
		for i, v := range pl {
			u[i] = float64(v)
			if !missing[i] {
				mean += float64(v)
				cnt++
			}
		}
		mean /= float64(max(cnt, 1))
		for _, i := range holes {
			u[i] = mean
		}
		for it := 0; it < 5000; it++ {
			change := 0.0
			for _, i := range holes {
				x, y := i%w, i/w
				s, k := 0.0, 0.0
				if x > 0 {
					s, k = s+u[i-1], k+1
				}
				if x < w-1 {
					s, k = s+u[i+1], k+1
				}
				if y > 0 {
					s, k = s+u[i-w], k+1
				}
				if y < h-1 {
					s, k = s+u[i+w], k+1
				}
				nv := u[i] + 1.85*(s/k-u[i])
				change = math.Max(change, math.Abs(nv-u[i]))
				u[i] = nv
			}
			if change < 0.01 {
				break
			}
		}
		for _, i := range holes {
			pl[i] = float32(u[i])
		}
	}
	return out
}
