package main

import (
	"bufio"
	"encoding/json"
	"io"
	"math"
)

// Record statuses.
const (
	statusDone    = "done"
	statusSkipped = "skipped"
	statusFailed  = "failed"
)

// record is one line of the --report file: one per listed input. Values
// that were never known for that input (the size of a skipped image, the
// σ of an unreadable file) are null.
type record struct {
	Input  string `json:"input"`
	Output string `json:"output"`
	Status string `json:"status"`
	Error  string `json:"error"`
	// Sigma is the σ the image was denoised with, in its own units; when
	// estimated, the root mean square of SigmaChannels.
	Sigma          *float64  `json:"sigma"`
	SigmaEstimated bool      `json:"sigma_estimated"`
	SigmaChannels  []float64 `json:"sigma_channels,omitempty"`
	// With --noise poisson (sigma is then null): the photon model's gain α
	// and read noise σ in the image's units, and whether each was
	// estimated; the per-channel fits when estimated.
	Gain               *float64  `json:"gain,omitempty"`
	GainEstimated      *bool     `json:"gain_estimated,omitempty"`
	GainChannels       []float64 `json:"gain_channels,omitempty"`
	ReadNoise          *float64  `json:"read_noise,omitempty"`
	ReadNoiseEstimated *bool     `json:"read_noise_estimated,omitempty"`
	ReadNoiseChannels  []float64 `json:"read_noise_channels,omitempty"`
	Width              *int      `json:"width"`
	Height             *int      `json:"height"`
	Channels           *int      `json:"channels"`
	BitDepth           *int      `json:"bit_depth"`
	Alpha              *bool     `json:"alpha"`
	Format             string    `json:"format"`           // format written, "" if none
	Method             string    `json:"method,omitempty"` // tessera denoise's --method
	MeanAtoms          *float64  `json:"mean_atoms"`
	Seconds            float64   `json:"seconds"`
	*Inpainting                  // tessera inpaint's keys; nil for denoise
}

// Inpainting holds the keys tessera inpaint adds to its records.
type Inpainting struct {
	Mask   string `json:"mask"`   // the mask file, or "value=V" for --missing-value
	Filled *int   `json:"filled"` // pixels given a value
	Passes *int   `json:"passes"` // passes run over the holes
	Note   string `json:"note,omitempty"`
}

func ptr[T any](v T) *T { return &v }

// round4 keeps reports readable; four decimals are far below any use.
func round4(v float64) float64 { return math.Round(v*1e4) / 1e4 }

// reportWriter writes records as JSON lines, flushing each so that a killed
// run keeps the records of the images it finished.
type reportWriter struct {
	w   *bufio.Writer
	c   io.Closer
	err error
}

func newReportWriter(w io.Writer, c io.Closer) *reportWriter {
	return &reportWriter{w: bufio.NewWriter(w), c: c}
}

func (r *reportWriter) write(rec *record) {
	if r == nil || r.err != nil {
		return
	}
	b, err := json.Marshal(rec)
	if err != nil {
		r.err = err
		return
	}
	r.w.Write(append(b, '\n'))
	r.err = r.w.Flush()
}

func (r *reportWriter) close() error {
	if r == nil {
		return nil
	}
	if r.c != nil {
		if err := r.c.Close(); err != nil && r.err == nil {
			r.err = err
		}
	}
	return r.err
}
