package analysis

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
)

// WriteReport writes a self-contained HTML report of the fit: settings,
// provenance of the inputs (names, sizes, SHA-256), warnings, the design
// matrix, and per contrast the threshold, a slice montage of the
// thresholded map over the mean image and the cluster table. Images are
// embedded as PNG data, so the file needs nothing else to be read.
func (r *FitResult) WriteReport(w io.Writer) error {
	data := reportData{S: r.Summary}
	var err error
	if data.Design, err = pngDataURL(r.designImage()); err != nil {
		return err
	}
	data.DesignNames = r.Design.Names()
	mean := r.MapOf(-1, "mean")
	for i, c := range r.Summary.Contrasts {
		thr := r.MapOf(i, "thresholded")
		z := r.MapOf(i, "z")
		img := r.montage(mean.Data, z.Data, thr.Data)
		url, err := pngDataURL(img)
		if err != nil {
			return err
		}
		data.Contrasts = append(data.Contrasts, reportContrast{C: c, Montage: url})
	}
	return reportTemplate.Execute(w, data)
}

type reportData struct {
	S           any
	Design      template.URL
	DesignNames []string
	Contrasts   []reportContrast
}

type reportContrast struct {
	C       any
	Montage template.URL
}

func pngDataURL(img image.Image) (template.URL, error) {
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		return "", err
	}
	return template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(b.Bytes())), nil
}

// designImage draws the design matrix: one row per volume, each column
// scaled to its own range, 8 pixels wide per column.
func (r *FitResult) designImage() image.Image {
	x := r.Design.X
	n, p := x.Dims()
	const cw = 12
	img := image.NewGray(image.Rect(0, 0, p*cw, n))
	for j := range p {
		col := mat.Col(nil, j, x)
		lo, hi := slices.Min(col), slices.Max(col)
		for t, v := range col {
			g := uint8(128)
			if hi > lo {
				g = uint8(math.Round(255 * (v - lo) / (hi - lo)))
			}
			for k := range cw - 1 {
				img.SetGray(j*cw+k, t, color.Gray{Y: g})
			}
		}
	}
	return img
}

// montage draws every axial slice that holds mask voxels, the mean image in
// grey with the thresholded z map in the report's colour table on top.
func (r *FitResult) montage(mean, z, thr []float32) image.Image {
	d := r.Grid.Dims
	var slicesK []int
	for k := range d[2] {
		for i := k * d[0] * d[1]; i < (k+1)*d[0]*d[1]; i++ {
			if r.Mask[i] {
				slicesK = append(slicesK, k)
				break
			}
		}
	}
	if len(slicesK) > 24 { // keep the report small: at most 24 slices, evenly spaced
		pick := make([]int, 24)
		for i := range pick {
			pick[i] = slicesK[i*len(slicesK)/24]
		}
		slicesK = pick
	}
	const cols, zoom = 6, 2
	rows := (len(slicesK) + cols - 1) / cols
	img := image.NewRGBA(image.Rect(0, 0, cols*d[0]*zoom, max(rows, 1)*d[1]*zoom))
	// Grey scale from the 2nd to the 98th percentile of the mean in the mask.
	var vals []float32
	for i, in := range r.Mask {
		if in {
			vals = append(vals, mean[i])
		}
	}
	lo, hi := float32(0), float32(1)
	if len(vals) > 0 {
		slices.Sort(vals)
		lo, hi = vals[len(vals)*2/100], vals[len(vals)*98/100]
	}
	var zlo, zhi float32 = math.MaxFloat32, 0
	for i, v := range thr {
		if v != 0 {
			zlo = min(zlo, z[i])
			zhi = max(zhi, z[i])
		}
	}
	if zhi <= zlo {
		zhi = zlo + 1
	}
	for s, k := range slicesK {
		ox, oy := (s%cols)*d[0]*zoom, (s/cols)*d[1]*zoom
		for j := range d[1] {
			for i := range d[0] {
				idx := i + d[0]*(j+d[1]*k)
				g := (mean[idx] - lo) / (hi - lo)
				g = min(max(g, 0), 1)
				c := color.RGBA{uint8(255 * g), uint8(255 * g), uint8(255 * g), 255}
				if thr[idx] != 0 {
					f := float64((z[idx] - zlo) / (zhi - zlo))
					c = reportRamp(f)
				}
				// Images have y down; show anterior (large j) at the top.
				for dy := range zoom {
					for dx := range zoom {
						img.SetRGBA(ox+i*zoom+dx, oy+(d[1]-1-j)*zoom+dy, c)
					}
				}
			}
		}
	}
	return img
}

// reportRamp is the page's "positive" colour table (site/views/colormap.js):
// OKLab lightness rising from 0.5 to 0.96 while the hue turns from 10 to 105
// degrees at chroma 0.2, chroma reduced where sRGB cannot show the colour.
func reportRamp(f float64) color.RGBA {
	f = min(max(f, 0), 1)
	L := 0.5 + 0.46*f
	h := (10 + 95*f) * math.Pi / 180
	c0, c1 := 0.0, 0.2
	rgb, ok := oklabToSRGB(L, c1*math.Cos(h), c1*math.Sin(h))
	if !ok {
		for range 24 {
			c := (c0 + c1) / 2
			if _, ok := oklabToSRGB(L, c*math.Cos(h), c*math.Sin(h)); ok {
				c0 = c
			} else {
				c1 = c
			}
		}
		rgb, _ = oklabToSRGB(L, c0*math.Cos(h), c0*math.Sin(h))
	}
	return color.RGBA{rgb[0], rgb[1], rgb[2], 255}
}

// oklabToSRGB converts with the matrices of Ottosson's OKLab note (2020) and
// the sRGB transfer curve (IEC 61966-2-1); ok reports whether the colour is
// inside the sRGB gamut.
func oklabToSRGB(L, a, b float64) ([3]uint8, bool) {
	l := L + 0.3963377774*a + 0.2158037573*b
	m := L - 0.1055613458*a - 0.0638541728*b
	s := L - 0.0894841775*a - 1.291485548*b
	l, m, s = l*l*l, m*m*m, s*s*s
	lin := [3]float64{
		4.0767416621*l - 3.3077115913*m + 0.2309699292*s,
		-1.2684380046*l + 2.6097574011*m - 0.3413193965*s,
		-0.0041960863*l - 0.7034186147*m + 1.707614701*s,
	}
	var out [3]uint8
	ok := true
	for i, c := range lin {
		if c < -1e-4 || c > 1+1e-4 {
			ok = false
		}
		if c <= 0.0031308 {
			c = 12.92 * c
		} else {
			c = 1.055*math.Pow(c, 1/2.4) - 0.055
		}
		out[i] = uint8(math.Round(255 * min(max(c, 0), 1)))
	}
	return out, ok
}

var reportTemplate = template.Must(template.New("report").Funcs(template.FuncMap{
	"f3": func(p *float64) string {
		if p == nil {
			return "–"
		}
		return fmt.Sprintf("%.3g", *p)
	},
	"num": func(v float64) string { return fmt.Sprintf("%.3g", v) },
	"mm":  func(v [3]float64) string { return fmt.Sprintf("%.1f, %.1f, %.1f", v[0], v[1], v[2]) },
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'">
<title>winnow report</title>
<style>
body{font:14px/1.45 system-ui,sans-serif;margin:2em auto;max-width:60em;color:#1d232a;padding:0 1em}
h1{font-size:1.5em;margin-bottom:.2em} h2{font-size:1.15em;margin-top:1.8em;border-bottom:1px solid #ccd;padding-bottom:.2em}
.caution{background:#fff4d6;border-left:4px solid #c98a00;padding:.5em .8em}
table{border-collapse:collapse;margin:.5em 0} td,th{border:1px solid #ccd;padding:.2em .5em;text-align:right} th{background:#eef0f4}
td.l,th.l{text-align:left} code{font-size:.92em} img{image-rendering:pixelated;max-width:100%}
.warn li{color:#8a3b00}
</style></head><body>
<h1>winnow report</h1>
<p>{{.S.Tool.Name}} {{.S.Tool.Version}} · first-level fit</p>
<p class="caution">Research and quality-assurance software, not a medical device. Clinical decisions rest with licensed practitioners and local rules.</p>
<h2>Inputs</h2>
<table><tr><th class="l">role</th><th class="l">file</th><th>bytes</th><th class="l">SHA-256</th></tr>
{{range .S.Inputs}}<tr><td class="l">{{.Role}}</td><td class="l">{{.Name}}</td><td>{{.Bytes}}</td><td class="l"><code>{{.SHA256}}</code></td></tr>{{end}}
</table>
<h2>Run and model</h2>
<table>
<tr><th class="l">dims</th><td class="l">{{.S.Dims}}</td></tr>
<tr><th class="l">voxel size (mm)</th><td class="l">{{mm .S.VoxelMM}}</td></tr>
<tr><th class="l">TR (s)</th><td class="l">{{f3 .S.TR}}</td></tr>
<tr><th class="l">noise model</th><td class="l">{{.S.Noise}}</td></tr>
<tr><th class="l">high-pass cutoff (s)</th><td class="l">{{num .S.HighpassSec}}</td></tr>
<tr><th class="l">smoothing FWHM (mm)</th><td class="l">{{num .S.SmoothMM}}</td></tr>
<tr><th class="l">mask voxels</th><td class="l">{{.S.MaskVoxels}}</td></tr>
<tr><th class="l">error df</th><td class="l">{{num .S.DF}}</td></tr>
<tr><th class="l">residual smoothness FWHM (mm)</th><td class="l">{{mm .S.FWHMmm}}</td></tr>
<tr><th class="l">resels</th><td class="l">{{num .S.Resels}}</td></tr>
{{with .S.Motion}}<tr><th class="l">framewise displacement (mm)</th><td class="l">mean {{num .MeanFDmm}}, max {{num .MaxFDmm}}</td></tr>{{end}}
</table>
<h2>Design matrix</h2>
<p>{{range $i, $n := .DesignNames}}{{if $i}}, {{end}}<code>{{$n}}</code>{{end}}</p>
<img src="{{.Design}}" alt="design matrix: one row per volume, one column per regressor" style="height:320px;width:auto">
{{if .S.Warnings}}<h2>Warnings</h2><ul class="warn">{{range .S.Warnings}}<li>{{.}}</li>{{end}}</ul>{{end}}
{{range .Contrasts}}{{with .C}}
<h2>Contrast {{.Name}} <small>({{.Kind}}, <code>{{.Spec}}</code>)</small></h2>
<p>Correction <b>{{.Correction}}</b>{{if not .Corrected}} (<b>uncorrected</b>){{end}} at alpha {{.Alpha}}{{with .ClusterP}}, cluster-forming p {{.}}{{end}}:
threshold {{.Kind}} &gt; {{f3 .StatThreshold}} (z {{f3 .ZThreshold}}); {{.SurvivingVoxels}} voxels survive in {{len .Clusters}} clusters.</p>
{{end}}<img src="{{.Montage}}" alt="axial slices, thresholded z over the mean image">
{{with .C}}{{if .Clusters}}<table><tr><th>#</th><th>voxels</th><th>mm³</th><th>peak {{.Kind}}</th><th>peak z</th><th>p corrected</th><th class="l">peak (mm)</th><th class="l">peak (voxel)</th></tr>
{{range $i, $c := .Clusters}}<tr><td>{{$i}}</td><td>{{$c.Voxels}}</td><td>{{num $c.VolumeMM3}}</td><td>{{num $c.PeakStat}}</td><td>{{num $c.PeakZ}}</td><td>{{f3 $c.PCorrected}}</td><td class="l">{{mm $c.PeakMM}}</td><td class="l">{{$c.PeakIJK}}</td></tr>{{end}}
</table>{{end}}{{end}}
{{end}}
</body></html>
`))
