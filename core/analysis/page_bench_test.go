package analysis

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"winnow/core/infer"
	"winnow/core/nifti"
)

// BenchmarkPageRethreshold re-thresholds a result of about 190 000 in-mask
// voxels (80 x 80 x 40, 40 volumes of noise with one block effect), the size
// the page's re-threshold target is stated for. Run with
// go test -run XXX -bench PageRethreshold -cpuprofile cpu.out.
func BenchmarkPageRethreshold(b *testing.B) {
	const nx, ny, nz, nv, tr = 80, 80, 40, 40, 2.0
	g := nifti.Grid{Dims: [3]int{nx, ny, nz}, VoxelMM: [3]float64{3, 3, 3},
		Affine:    [4][4]float64{{3, 0, 0, -118.5}, {0, 3, 0, -118.5}, {0, 0, 3, -58.5}, {0, 0, 0, 1}},
		SformCode: 2, QformCode: 2}
	var buf bytes.Buffer
	w, err := nifti.NewWriter(&buf, g, nv, tr, nifti.WriteOptions{Datatype: nifti.Int16})
	if err != nil {
		b.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(5, 6))
	vol := make([]float32, nx*ny*nz)
	for v := range nv {
		on := math.Mod(float64(v)*tr, 40) < 16
		for k := range nz {
			for j := range ny {
				for i := range nx {
					x, y, z := (float64(i)-39.5)/46, (float64(j)-39.5)/46, (float64(k)-19.5)/23
					val := 0.0
					if x*x+y*y+z*z <= 1 {
						val = 1000 + 20*rng.NormFloat64()
						if on && i >= 30 && i < 40 && j >= 30 && j < 40 && k >= 15 && k < 25 {
							val += 40
						}
					}
					vol[i+nx*(j+ny*k)] = float32(math.Round(val))
				}
			}
		}
		if err := w.WriteVolume(vol); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	ev := "onset\tduration\ttrial_type\n"
	for s := 0; s < nv*tr; s += 40 {
		ev += fmt.Sprintf("%d\t16\ta\n%d\t10\tb\n", s, s+20)
	}
	res, err := Fit(context.Background(), FitInputs{Bold: bytesInput("bold.nii.gz", buf.Bytes()), Events: bytesInput("events.tsv", []byte(ev))},
		FitOptions{Contrasts: []string{"a-b=a - b"}})
	if err != nil {
		b.Fatal(err)
	}
	for _, m := range []infer.Method{infer.MethodNone, infer.MethodFWERFT, infer.MethodFDRBH, infer.MethodClusterRFT} {
		b.Run(m.String(), func(b *testing.B) {
			for b.Loop() {
				if err := res.Rethreshold(m, 0.05, 0.001); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
	b.Run("histogram", func(b *testing.B) {
		for b.Loop() {
			res.Histogram(0, 0)
		}
	})
	b.Run("summary-json-none", func(b *testing.B) {
		res.Rethreshold(infer.MethodNone, 0.05, 0.001)
		var out bytes.Buffer
		for b.Loop() {
			out.Reset()
			res.WriteSummary(&out)
		}
		b.ReportMetric(float64(len(res.Summary.Contrasts[0].Clusters)), "clusters")
	})
}
