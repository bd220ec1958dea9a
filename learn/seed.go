package learn

import "math/rand/v2"

// SubSeed derives a seed from a parent seed and labels (an image name, a
// stage), so that every random choice depends on what it is for and never
// on time or goroutine order.
func SubSeed(seed uint64, labels ...string) uint64 {
	h := seed ^ 0x9e3779b97f4a7c15
	for _, l := range labels {
		for i := 0; i < len(l); i++ {
			h ^= uint64(l[i])
			h *= 0x100000001b3 // FNV-1a prime
		}
		h = mix(h ^ uint64(len(l)))
	}
	return mix(h)
}

// mix is the SplitMix64 finaliser (Steele, Lea & Flood 2014).
func mix(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// NewRand returns a PCG generator for a derived seed.
func NewRand(seed uint64) *rand.Rand {
	return rand.New(rand.NewPCG(seed, mix(seed+1)))
}
