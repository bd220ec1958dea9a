package main

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"tessera/patches"
	"tessera/restore"
	"tessera/restore/noise"
)

// estimateSigma gives the noise σ of each channel of an image, in the
// image's units; it is used when --sigma is omitted. A colour image is
// denoised with the root mean square of its channels' estimates: the
// opponent transform it is coded in is orthonormal, so that σ is the noise
// of every opponent channel when R, G and B share it.
var estimateSigma = noise.EstimateAll

// Noise models of --noise.
const (
	noiseGauss   = "gauss"
	noisePoisson = "poisson"
)

// photonFit is the photon model fitted to an image, in its units.
type photonFit struct {
	gain, read   float64   // what the image is denoised with
	gains, reads []float64 // per channel
}

// estimatePhoton fits z = α·Poisson(y/α) + N(0, σ²) to each channel. A
// colour image is denoised with one model for all channels: the mean gain
// and the root mean square read noise.
func estimatePhoton(img *patches.Image) photonFit {
	var f photonFit
	for c := 0; c < img.C; c++ {
		a, s := noise.EstimatePoisson(img, c)
		f.gains = append(f.gains, a)
		f.reads = append(f.reads, s)
	}
	f.gain, f.read = mean(f.gains), rms(f.reads)
	return f
}

func mean(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(max(1, len(v)))
}

func rms(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(max(1, len(v))))
}

func round4All(v []float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = round4(x)
	}
	return out
}

// errNoGain is an estimated gain of 0: no signal-dependent noise found.
var errNoGain = errors.New("no signal-dependent noise found (estimated gain 0); give --gain, or use --noise gauss")

// denoiseImage restores img with the noise model of the command line and
// notes the photon model's parameters in rec. sigma is used by the
// Gaussian model only.
func (c *config) denoiseImage(img *patches.Image, sigma float64, opt restore.Options, rec *record) (*patches.Image, *restore.Result, error) {
	if c.noise != noisePoisson {
		return c.gaussDenoise(img, sigma, opt)
	}
	rec.Sigma, rec.SigmaEstimated, rec.SigmaChannels = nil, false, nil
	gain, read := c.gain, c.readNoise
	if !c.gainSet || !c.readSet {
		f := estimatePhoton(img)
		if !c.gainSet {
			gain = f.gain
			rec.GainChannels = round4All(f.gains)
		}
		if !c.readSet {
			read = f.read
			rec.ReadNoiseChannels = round4All(f.reads)
		}
	}
	rec.Gain, rec.ReadNoise = ptr(round4(gain)), ptr(round4(read))
	rec.GainEstimated, rec.ReadNoiseEstimated = ptr(!c.gainSet), ptr(!c.readSet)
	if !(gain > 0) {
		return nil, nil, errNoGain
	}
	if peak := img.Peak(); read >= peak {
		return nil, nil, fmt.Errorf("read noise %g is not below the %d-bit peak %g; give --read-noise in the image's own units", read, img.Depth, peak)
	}
	return restore.DenoisePhotonWith(img, gain, read, opt, c.gaussDenoise)
}

// parseNoise reads --noise, --gain and --read-noise.
func (c *config) parseNoise(cc *cli.Context) error {
	c.noise = strings.ToLower(cc.String("noise"))
	switch c.noise {
	case noiseGauss:
		for _, f := range []string{"gain", "read-noise"} {
			if cc.IsSet(f) {
				return usagef("--%s goes with --noise poisson (the photon model); the default model is white Gaussian noise of --sigma", f)
			}
		}
		return nil
	case noisePoisson:
	default:
		return usagef("--noise %q: unknown noise model; choose gauss (white Gaussian) or poisson (photon-limited)", cc.String("noise"))
	}
	if cc.IsSet("sigma") {
		return usagef("--sigma goes with --noise gauss; the photon model takes --gain and --read-noise (both estimated per image when omitted)")
	}
	var err error
	if cc.IsSet("gain") {
		c.gainSet = true
		if c.gain, err = parsePhoton("gain", cc.String("gain"), false); err != nil {
			return err
		}
	}
	if cc.IsSet("read-noise") {
		c.readSet = true
		if c.readNoise, err = parsePhoton("read-noise", cc.String("read-noise"), true); err != nil {
			return err
		}
	}
	return nil
}

// parsePhoton reads --gain (above 0) or --read-noise (0 allowed): finite
// numbers in the image's own units.
func parsePhoton(flag, s string, zero bool) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	what := "above 0"
	if zero {
		what = "0 or more"
	}
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < 0 || (v == 0 && !zero) {
		return 0, usagef("--%s %q: must be a finite number %s, in the image's own units", flag, s, what)
	}
	return v, nil
}
