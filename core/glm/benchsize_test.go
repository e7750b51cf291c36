package glm

import (
	"fmt"
	"math"
	"testing"
)

// BenchmarkFitSize: Fit at 50k and 200k voxels, 20 regressors, 40 volumes, AR(1) with the ρ
// map smoothed, one t contrast; one op is one Fit.
func BenchmarkFitSize(b *testing.B) {
	for _, nvox := range []int{50_000, 200_000} {
		b.Run(fmt.Sprintf("voxels=%dk", nvox/1000), func(b *testing.B) {
			dims, vox := benchGrid(nvox)
			const n, p = 40, 20
			vols := benchVolumes(len(vox), 8)
			a := NewAccumulator(benchDesign(n, p), dims, vox)
			for t := 0; t < n; t++ {
				a.AddVolume(vols[t%len(vols)])
			}
			c := make([]float64, p)
			c[1] = 1
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				f, err := a.Fit(Options{VoxelMM: [3]float64{3, 3, 3}, Contrasts: [][][]float64{{c}}})
				if err != nil || math.IsNaN(f.FWHMVoxels[0]) {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(len(vox))*float64(b.N)/b.Elapsed().Seconds(), "voxels/s")
		})
	}
}
