package main

import (
	"bytes"
	_ "embed"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/learn"
	"tessera/patches"
)

//go:embed htmlreport.tmpl
var htmlReportText string

var htmlReportTmpl = template.Must(template.New("report").Parse(htmlReportText))

// methodLabel names a method for people.
func methodLabel(m string) string {
	switch m {
	case methodLearned:
		return "K-SVD, learned"
	case methodDCT:
		return "DCT, fixed"
	case methodGroup:
		return "groups, learned"
	}
	return m
}

// Page colours, shared by the charts and the atom pictures.
var (
	pagePaper  = color.RGBA{0xf6, 0xf4, 0xef, 0xff}
	pageInk    = color.RGBA{0x1e, 0x25, 0x30, 0xff}
	pageMuted  = color.RGBA{0x98, 0x9f, 0xab, 0xff}
	seriesInks = []color.RGBA{
		{0x0e, 0x6f, 0x68, 0xff}, // learned
		{0xb0, 0x56, 0x1c, 0xff}, // fixed DCT
		{0x4b, 0x5d, 0xa8, 0xff},
		{0x8a, 0x3f, 0x8f, 0xff},
	}
)

// Template data.
type (
	pageData struct {
		Title, SetLabel, SigmaList, Mode, Started, Version string
		Count, Side                                        int
		Color                                              bool
		Options                                            benchOptions
		Means                                              []pageMean
		Charts                                             []pageChart
		Runs                                               []pageRun
		Images                                             []pageImage
		Failed                                             []string
	}
	pageMean struct {
		Sigma, NoisyPSNR, NoisySSIM string
		Cells                       []pageCell
		Adds                        string
	}
	pageCell  struct{ Label, PSNR, Gain, SSIM, Seconds string }
	pageChart struct {
		Src, Alt, Caption string
		W, H              int
	}
	pageRun struct {
		Image, Sigma, Method, NoisyPSNR, PSNR, Gain, GainClass, NoisySSIM, SSIM, Seconds string
		Mean                                                                             bool
	}
	pageImage struct {
		ID, Name, Clean    string
		W, H, X0, Y0, Side int
		Rows               []pageStrip
	}
	pageStrip struct {
		Sigma, Noisy, NoisyPSNR string
		Restored                []pageTile
		Atoms, AtomsCaption     string
		AtomsW, AtomsH          int
	}
	pageTile struct{ Src, Label, PSNR string }
)

// writeHTMLReport writes dir/index.html and its pictures under
// dir/images; every file is written atomically.
func writeHTMLReport(dir string, rep *benchReport, shots []*benchShots) error {
	imgDir := filepath.Join(dir, "images")
	if err := os.MkdirAll(imgDir, 0o755); err != nil {
		return fmt.Errorf("%s: cannot create the folder (%s)", imgDir, errText(err))
	}
	d := pageData{
		Title:    "tessera bench · " + setLabel(rep.Options),
		SetLabel: setLabel(rep.Options),
		Mode:     "gray (BT.601 luma, rounded)",
		Started:  rep.Started.Format("2006-01-02 15:04 UTC"),
		Version:  rep.Version,
		Count:    len(rep.Options.Images),
		Side:     cropSide,
		Color:    rep.Options.Color,
		Options:  rep.Options,
		Failed:   rep.Failed,
	}
	if rep.Options.Color {
		d.Mode = "RGB"
	}
	var sig []string
	for _, s := range rep.Options.Sigmas {
		sig = append(sig, fmt.Sprintf("%g", s))
	}
	d.SigmaList = strings.Join(sig, ", ")

	// Means, one card per σ.
	for _, s := range rep.Options.Sigmas {
		var pm pageMean
		byMethod := map[string]benchMean{}
		for _, m := range rep.Mean {
			if m.Sigma != s {
				continue
			}
			byMethod[m.Method] = m
			pm.Sigma, pm.NoisyPSNR, pm.NoisySSIM = fmt.Sprintf("%g", s), fmt.Sprintf("%.2f", m.PSNRNoisy), fmt.Sprintf("%.4f", m.SSIMNoisy)
			pm.Cells = append(pm.Cells, pageCell{Label: methodLabel(m.Method), PSNR: fmt.Sprintf("%.2f", m.PSNR),
				Gain: fmt.Sprintf("%+.2f", m.PSNR-m.PSNRNoisy), SSIM: fmt.Sprintf("%.4f", m.SSIM), Seconds: fmt.Sprintf("%.1f", m.Seconds)})
		}
		if l, ok := byMethod[methodLearned]; ok {
			if f, ok := byMethod[methodDCT]; ok {
				pm.Adds = fmt.Sprintf("%+.2f", l.PSNR-f.PSNR)
			}
		}
		if pm.Cells != nil {
			d.Means = append(d.Means, pm)
		}
	}

	// The run table, with the mean rows after each group.
	for _, m := range rep.Mean {
		for _, r := range rep.Runs {
			if r.Sigma == m.Sigma && r.Method == m.Method {
				d.Runs = append(d.Runs, pageRunOf(r.Image, r.Sigma, r.Method, r.PSNRNoisy, r.PSNR, r.SSIMNoisy, r.SSIM, r.Seconds, false))
			}
		}
		d.Runs = append(d.Runs, pageRunOf(fmt.Sprintf("mean of %d", m.Images), m.Sigma, m.Method, m.PSNRNoisy, m.PSNR, m.SSIMNoisy, m.SSIM, m.Seconds, true))
	}

	// Charts.
	if len(rep.Mean) > 0 {
		for _, ch := range []struct {
			name, ylabel, caption string
			get                   func(benchMean) (noisy, restored float64)
		}{
			{"psnr", "mean PSNR (dB)", "Mean PSNR against σ: higher is better; the lowest line is the noisy input.",
				func(m benchMean) (float64, float64) { return m.PSNRNoisy, m.PSNR }},
			{"ssim", "mean SSIM", "Mean SSIM against σ (1 is a perfect match).",
				func(m benchMean) (float64, float64) { return m.SSIMNoisy, m.SSIM }},
		} {
			png, w, h, err := sigmaChart(rep, ch.ylabel, ch.get)
			if err != nil {
				return fmt.Errorf("%s: cannot draw the %s chart (%v)", dir, ch.name, err)
			}
			name := "chart-" + ch.name + ".png"
			if err := writeBytesAtomic(filepath.Join(imgDir, name), png); err != nil {
				return err
			}
			d.Charts = append(d.Charts, pageChart{Src: "images/" + name, Alt: ch.ylabel + " against σ", Caption: ch.caption, W: w, H: h})
		}
	}

	// Pictures.
	for i, sh := range shots {
		stem := fmt.Sprintf("%02d-%s", i+1, fileStem(sh.image))
		put := func(suffix string, m *patches.Image) (string, error) {
			name := stem + suffix + ".png"
			err := imgfile.WriteFileAtomic(filepath.Join(imgDir, name), &imgfile.File{Img: display8(m), Format: "png"}, "png")
			return "images/" + name, err
		}
		pi := pageImage{ID: "img-" + stem, Name: sh.image, W: sh.w, H: sh.h, X0: sh.x0, Y0: sh.y0, Side: sh.side}
		var err error
		if pi.Clean, err = put("-clean", sh.clean); err != nil {
			return err
		}
		for _, row := range sh.rows {
			sg := fmt.Sprintf("-s%g", row.sigma)
			ps := pageStrip{Sigma: fmt.Sprintf("%g", row.sigma), NoisyPSNR: fmt.Sprintf("%.2f", row.psnrNoisy)}
			if ps.Noisy, err = put(sg+"-noisy", row.noisy); err != nil {
				return err
			}
			for k, m := range row.restored {
				method := rep.Options.Methods[k]
				src, err := put(sg+"-"+method, m)
				if err != nil {
					return err
				}
				ps.Restored = append(ps.Restored, pageTile{Src: src, Label: methodLabel(method), PSNR: fmt.Sprintf("%.2f", row.psnr[k])})
			}
			if a := atomsPicture(row.dict); a != nil {
				if ps.Atoms, err = put(sg+"-atoms", a); err != nil {
					return err
				}
				ps.AtomsW, ps.AtomsH = a.W, a.H
				ps.AtomsCaption = fmt.Sprintf("the %d learned atoms (%d×%d), each scaled to its own range", row.dict.K, row.dict.Patch, row.dict.Patch)
			}
			pi.Rows = append(pi.Rows, ps)
		}
		d.Images = append(d.Images, pi)
	}

	var b bytes.Buffer
	if err := htmlReportTmpl.Execute(&b, d); err != nil {
		return fmt.Errorf("%s: cannot build the page (%v)", dir, err)
	}
	return writeBytesAtomic(filepath.Join(dir, "index.html"), b.Bytes())
}

func setLabel(o benchOptions) string {
	if o.Set == "kodak" {
		return "Kodak set"
	}
	return o.Set
}

func pageRunOf(image string, sigma float64, method string, pn, p, sn, s, sec float64, mean bool) pageRun {
	r := pageRun{Image: image, Sigma: fmt.Sprintf("%g", sigma), Method: methodLabel(method),
		NoisyPSNR: fmt.Sprintf("%.2f", pn), PSNR: fmt.Sprintf("%.2f", p), Gain: fmt.Sprintf("%+.2f", p-pn),
		NoisySSIM: fmt.Sprintf("%.4f", sn), SSIM: fmt.Sprintf("%.4f", s), Seconds: fmt.Sprintf("%.1f", sec), Mean: mean}
	switch {
	case p > pn:
		r.GainClass = "up"
	case p < pn:
		r.GainClass = "down"
	}
	return r
}

var unsafeName = regexp.MustCompile(`[^A-Za-z0-9._-]+`)

// fileStem turns an image's relative path into a safe file-name stem.
func fileStem(name string) string {
	s := strings.TrimSuffix(name, filepath.Ext(name))
	s = unsafeName.ReplaceAllString(s, "_")
	if len(s) > 60 {
		s = s[:60]
	}
	return s
}

// display8 gives the 8-bit copy of an image for display.
func display8(m *patches.Image) *patches.Image {
	if m.Depth == 8 {
		return m
	}
	out := patches.New(m.W, m.H, m.C, 8)
	s := 255 / m.Peak()
	for i, v := range m.Pix {
		out.Pix[i] = float32(math.Min(255, math.Max(0, math.Floor(float64(v)*s+0.5))))
	}
	return out
}

// atomsPicture lays the atoms of a patch dictionary out in a grid, each
// scaled from its own minimum to its maximum, on the page colour, and
// enlarged by whole pixels towards 300 pixels across. It returns nil for
// a dictionary that is not of patches.
func atomsPicture(d *learn.Dict) *patches.Image {
	if d == nil || d.Patch < 1 || d.Channels < 1 || d.N != d.Channels*d.Patch*d.Patch || len(d.Atoms) != d.N*d.K {
		return nil
	}
	g := layAtoms(d, nil, 1)
	z := max(1, 300/g.W)
	img := patches.New(g.W*z, g.H*z, 3, 8)
	paper := [3]float32{float32(pagePaper.R), float32(pagePaper.G), float32(pagePaper.B)}
	gwh := g.W * g.H
	for c := 0; c < 3; c++ {
		src, pl := g.Pix[(c%d.Channels)*gwh:], img.Plane(c)
		for y := range img.H {
			for x := range img.W {
				v := src[(y/z)*g.W+x/z]
				if v != v {
					v = paper[c]
				}
				pl[y*img.W+x] = v
			}
		}
	}
	return img
}

// chartDPI draws the charts at twice the page's 96 dpi, so they stay sharp
// on dense screens; the page shows them at half their pixel size.
const chartDPI = 192

// sigmaChart draws one line per method (and one for the noisy input) of a
// mean figure against σ, and returns the PNG with its display size.
func sigmaChart(rep *benchReport, ylabel string, get func(benchMean) (noisy, restored float64)) ([]byte, int, int, error) {
	sans := font.Font{Typeface: "Liberation", Variant: "Sans"}
	p := plot.New()
	p.BackgroundColor = color.White
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Label.TextStyle.Font = font.From(sans, 11)
		ax.Label.TextStyle.Color = pageInk
		ax.Tick.Label.Font = font.From(sans, 9.5)
		ax.Tick.Label.Color = pageInk
		ax.Color = pageMuted
		ax.Tick.Color = pageMuted
	}
	p.Legend.TextStyle.Font = font.From(sans, 10)
	p.Legend.TextStyle.Color = pageInk
	p.Legend.Top = true
	p.Legend.Left = false
	p.X.Label.Text = "σ (0–255 scale)"
	p.Y.Label.Text = ylabel
	var ticks []plot.Tick
	for _, s := range rep.Options.Sigmas {
		ticks = append(ticks, plot.Tick{Value: s, Label: fmt.Sprintf("%g", s)})
	}
	p.X.Tick.Marker = plot.ConstantTicks(ticks)
	grid := plotter.NewGrid()
	grid.Vertical.Color = color.RGBA{0xe8, 0xe5, 0xde, 0xff}
	grid.Horizontal.Color = grid.Vertical.Color
	p.Add(grid)

	add := func(label string, xys plotter.XYs, ink color.Color, dashed bool) error {
		l, pts, err := plotter.NewLinePoints(xys)
		if err != nil {
			return err
		}
		l.Color, l.Width = ink, vg.Points(1.8)
		if dashed {
			l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		}
		pts.Color, pts.Radius, pts.Shape = ink, vg.Points(3), draw.CircleGlyph{}
		p.Add(l, pts)
		p.Legend.Add(label, l, pts)
		return nil
	}
	for k, m := range rep.Options.Methods {
		var xys plotter.XYs
		for _, bm := range rep.Mean {
			if bm.Method == m {
				_, v := get(bm)
				xys = append(xys, plotter.XY{X: bm.Sigma, Y: v})
			}
		}
		if len(xys) > 0 {
			if err := add(methodLabel(m), xys, seriesInks[k%len(seriesInks)], false); err != nil {
				return nil, 0, 0, err
			}
		}
	}
	var noisy plotter.XYs
	for _, bm := range rep.Mean {
		if bm.Method == rep.Options.Methods[0] {
			v, _ := get(bm)
			noisy = append(noisy, plotter.XY{X: bm.Sigma, Y: v})
		}
	}
	if len(noisy) > 0 {
		if err := add("noisy input", noisy, pageMuted, true); err != nil {
			return nil, 0, 0, err
		}
	}
	// Room around single points and for the legend.
	if p.X.Max-p.X.Min < 1 {
		p.X.Min, p.X.Max = p.X.Min-5, p.X.Max+5
	} else {
		pad := 0.06 * (p.X.Max - p.X.Min)
		p.X.Min, p.X.Max = p.X.Min-pad, p.X.Max+pad
	}
	span := math.Max(p.Y.Max-p.Y.Min, 1e-3)
	p.Y.Min, p.Y.Max = p.Y.Min-0.08*span, p.Y.Max+0.35*span

	const wPt, hPt = 369, 234 // points; 492×312 CSS pixels
	c := vgimg.NewWith(vgimg.UseWH(vg.Points(wPt), vg.Points(hPt)), vgimg.UseDPI(chartDPI))
	p.Draw(draw.New(c))
	var b bytes.Buffer
	if _, err := (vgimg.PngCanvas{Canvas: c}).WriteTo(&b); err != nil {
		return nil, 0, 0, err
	}
	return b.Bytes(), wPt * 96 / 72, hPt * 96 / 72, nil
}
