package learn

import (
	"image"
	"image/png"
	"os"
	"runtime"
	"sync"
	"testing"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// kodakPatches returns m mean-removed 8×8 patches of kodim01 (gray by
// BT.601) with white noise of σ = 25, the setting of K-SVD denoising.
func kodakPatches(b *testing.B, m int) []float64 {
	f, err := os.Open(sharedPath(b, "kodak", "kodim01.png"))
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		b.Fatal(err)
	}
	bd := img.Bounds()
	w, h := bd.Dx(), bd.Dy()
	gray := make([]float64, w*h)
	r := NewRand(25)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			c := img.At(bd.Min.X+x, bd.Min.Y+y).(interface{ RGBA() (r, g, b, a uint32) })
			R, G, B, _ := c.RGBA()
			gray[y*w+x] = 0.299*float64(R>>8) + 0.587*float64(G>>8) + 0.114*float64(B>>8) + 25*r.NormFloat64()
		}
	}
	_ = image.Point{}
	X := make([]float64, 0, m*64)
	for y := 0; y+8 <= h && len(X) < m*64; y++ {
		for x := 0; x+8 <= w && len(X) < m*64; x++ {
			var p [64]float64
			mean := 0.0
			for i := 0; i < 8; i++ {
				for j := 0; j < 8; j++ {
					p[i*8+j] = gray[(y+i)*w+x+j]
					mean += p[i*8+j]
				}
			}
			for i := range p {
				p[i] -= mean / 64
			}
			X = append(X, p[:]...)
		}
	}
	return X
}

// BenchmarkOMP codes 40,000 noisy Kodak patches over the 256-atom DCT to
// ε = 64·(1.15·25)². Reported: patches/s, and the rate of the correlation
// products inside Code as a fraction of a bare gonum Dgemm of the same shape.
func BenchmarkOMP(b *testing.B) {
	b.Run("float64", func(b *testing.B) { benchOMP(b, false) })
	b.Run("float32", func(b *testing.B) { benchOMP(b, true) })
}

func benchOMP(b *testing.B, single bool) {
	const m = 40000
	X := kodakPatches(b, m)
	d := OvercompleteDCT(8, 16, 1)
	c := NewCoder(d)
	c.Single = single
	eps := 64 * (1.15 * 25) * (1.15 * 25)
	// Bare Dgemm rate on one block, on the same number of goroutines.
	gemmRate := bareGemmRate(X, d)
	b.ResetTimer()
	var codes *Codes
	for i := 0; i < b.N; i++ {
		codes = c.Code(X, m, eps, nil, 32)
	}
	b.StopTimer()
	rate := float64(m*b.N) / b.Elapsed().Seconds()
	b.ReportMetric(rate, "patches/s")
	b.ReportMetric(rate/gemmRate, "of-f64-gemm-rate")
	b.ReportMetric(float64(len(codes.Idx))/m, "atoms/patch")
	b.ReportMetric(0, "ns/op")
}

// bareGemmRate is the patches/s of the float64 correlation products alone,
// block by block on every processor, as Code runs them.
func bareGemmRate(X []float64, d *Dict) float64 {
	procs := runtime.GOMAXPROCS(0)
	var wg sync.WaitGroup
	t0 := time.Now()
	const reps = 40
	for p := 0; p < procs; p++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			corr := make([]float64, blockSize*d.K)
			for r := 0; r < reps; r++ {
				blas64.Implementation().Dgemm(blas.NoTrans, blas.Trans, blockSize, d.K, d.N, 1, X[:blockSize*d.N], d.N, d.Atoms, d.N, 0, corr, d.K)
			}
		}()
	}
	wg.Wait()
	return float64(procs*reps*blockSize) / time.Since(t0).Seconds()
}

// BenchmarkKSVDRound is one approximate K-SVD round on 40,000 such patches.
func BenchmarkKSVDRound(b *testing.B) {
	const m = 40000
	X := kodakPatches(b, m)
	d := OvercompleteDCT(8, 16, 1)
	eps := 64 * (1.15 * 25) * (1.15 * 25)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		KSVD(d, X, m, KSVDOptions{Rounds: 1, Eps: eps, MaxAtoms: 32})
	}
}
