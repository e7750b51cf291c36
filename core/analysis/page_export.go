package analysis

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strconv"

	"winnow/core/nifti"
)

// MapBytes encodes map i of the result as a gzip-compressed NIfTI-1 file,
// the same bytes WriteDir writes under Maps[i].File.
func (r *FitResult) MapBytes(i int) ([]byte, error) {
	if i < 0 || i >= len(r.Maps) {
		return nil, fmt.Errorf("analysis: map %d; want 0 to %d", i, len(r.Maps)-1)
	}
	var b bytes.Buffer
	m := r.Maps[i]
	if err := nifti.WriteMap(&b, r.Grid, m.Data, m.Write); err != nil {
		return nil, fmt.Errorf("writing %s: %w", m.File, err)
	}
	return b.Bytes(), nil
}

// ClusterColumns are the header of the cluster table WriteClusterTSV writes.
var ClusterColumns = []string{
	"contrast", "cluster", "voxels", "volume_mm3",
	"peak_x_mm", "peak_y_mm", "peak_z_mm", "peak_i", "peak_j", "peak_k",
	"peak_stat", "peak_z", "p_corrected",
}

// WriteClusterTSV writes the clusters of every contrast under the current
// threshold as a tab-separated table: one row per cluster, clusters numbered
// from 1 within each contrast in the summary's order, "n/a" where a value
// is absent (a corrected p under an uncorrected threshold).
func (r *FitResult) WriteClusterTSV(w io.Writer) error {
	bw := bufio.NewWriter(w)
	for i, c := range ClusterColumns {
		if i > 0 {
			bw.WriteByte('\t')
		}
		bw.WriteString(c)
	}
	bw.WriteByte('\n')
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', 8, 64) }
	for _, c := range r.Summary.Contrasts {
		for k, cl := range c.Clusters {
			p := "n/a"
			if cl.PCorrected != nil {
				p = num(*cl.PCorrected)
			}
			fields := []string{
				c.Name, strconv.Itoa(k + 1), strconv.Itoa(cl.Voxels), num(cl.VolumeMM3),
				num(cl.PeakMM[0]), num(cl.PeakMM[1]), num(cl.PeakMM[2]),
				strconv.Itoa(cl.PeakIJK[0]), strconv.Itoa(cl.PeakIJK[1]), strconv.Itoa(cl.PeakIJK[2]),
				num(cl.PeakStat), num(cl.PeakZ), p,
			}
			for j, f := range fields {
				if j > 0 {
					bw.WriteByte('\t')
				}
				bw.WriteString(f)
			}
			bw.WriteByte('\n')
		}
	}
	return bw.Flush()
}
