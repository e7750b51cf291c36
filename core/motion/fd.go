package motion

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"

	"winnow/core/report"
)

// DefaultFDThresholdMM is the framewise displacement above which a volume is
// counted as a high-motion volume (0.5 mm, common practice).
const DefaultFDThresholdMM = 0.5

// TaskCorrelationWarn is the absolute correlation between a motion parameter
// and a task regressor above which TaskCorrelation warns (0.3, common
// practice).
const TaskCorrelationWarn = 0.3

// CheckReference checks that a reference volume index lies in a run of
// nvols volumes, and that the run has at least two volumes.
func CheckReference(index, nvols int) error {
	if nvols < 2 {
		return fmt.Errorf("motion: the run has %d volume(s); want at least 2 to realign", nvols)
	}
	if index < 0 || index >= nvols {
		return fmt.Errorf("motion: reference volume %d; want 0 to %d (0-based index in the run of %d volumes)", index, nvols-1, nvols)
	}
	return nil
}

// FramewiseDisplacement returns FD per volume (Power et al. 2012):
// FD_t = |Δtx| + |Δty| + |Δtz| + 50 mm·(|Δrx| + |Δry| + |Δrz|), rotation
// differences in radians, Δ between volume t and t−1; FD_0 = 0.
func FramewiseDisplacement(p []Params) []float64 {
	fd := make([]float64, len(p))
	for t := 1; t < len(p); t++ {
		var s float64
		for a := 0; a < 3; a++ {
			s += math.Abs(p[t][a] - p[t-1][a])
			s += HeadRadiusMM * deg * math.Abs(p[t][a+3]-p[t-1][a+3])
		}
		fd[t] = s
	}
	return fd
}

// Figures summarise framewise displacement over a run.
type Figures struct {
	Volumes     int     // rows of the FD series
	MeanFDmm    float64 // mean over the n−1 frame-to-frame differences (FD_0 excluded); 0 for one volume
	MaxFDmm     float64
	ThresholdMM float64 // the threshold Above counts against
	Above       int     // volumes with FD > ThresholdMM
}

// Summarise computes the FD figures of a series from FramewiseDisplacement;
// thresholdMM 0 means DefaultFDThresholdMM.
func Summarise(fd []float64, thresholdMM float64) Figures {
	if thresholdMM == 0 {
		thresholdMM = DefaultFDThresholdMM
	}
	f := Figures{Volumes: len(fd), ThresholdMM: thresholdMM}
	var s float64
	for t := 1; t < len(fd); t++ {
		s += fd[t]
		f.MaxFDmm = math.Max(f.MaxFDmm, fd[t])
		if fd[t] > thresholdMM {
			f.Above++
		}
	}
	if len(fd) > 1 {
		f.MeanFDmm = s / float64(len(fd)-1)
	}
	return f
}

// Report returns the summary.json "motion" block.
func (f Figures) Report() *report.Motion {
	return &report.Motion{MeanFDmm: f.MeanFDmm, MaxFDmm: f.MaxFDmm}
}

// Text is a one-line description for a terminal or a log.
func (f Figures) Text() string {
	return fmt.Sprintf("framewise displacement: mean %.3f mm, max %.3f mm, %d of %d volumes above %g mm",
		f.MeanFDmm, f.MaxFDmm, f.Above, f.Volumes, f.ThresholdMM)
}

// WriteTSV writes motion.tsv: the header
// "trans_x trans_y trans_z rot_x rot_y rot_z framewise_displacement"
// (tab-separated; mm, degrees, mm) and one row per volume. It panics if fd
// is not as long as p.
func WriteTSV(w io.Writer, p []Params, fd []float64) error {
	if len(fd) != len(p) {
		panic(fmt.Sprintf("motion: %d parameter rows and %d FD values", len(p), len(fd)))
	}
	bw := bufio.NewWriter(w)
	for _, n := range Names {
		bw.WriteString(n)
		bw.WriteByte('\t')
	}
	bw.WriteString("framewise_displacement\n")
	var buf []byte
	for t, row := range p {
		buf = buf[:0]
		for _, v := range row {
			buf = strconv.AppendFloat(buf, v, 'f', 6, 64)
			buf = append(buf, '\t')
		}
		buf = strconv.AppendFloat(buf, fd[t], 'f', 6, 64)
		buf = append(buf, '\n')
		bw.Write(buf)
	}
	return bw.Flush()
}

// TaskCorr is the largest absolute correlation between a motion parameter
// and a task regressor.
type TaskCorr struct {
	R       float64 // signed Pearson correlation of the pair with the largest |r|
	Param   string  // motion.tsv column name
	Column  string  // task regressor name
	Warning string  // non-empty when |R| > TaskCorrelationWarn
}

// TaskCorrelation returns the motion parameter and task regressor (names[c]
// for columns[c], one value per volume) with the largest absolute Pearson
// correlation. Constant series (a parameter that never moves, an intercept)
// have no correlation and are skipped. It returns an error when a column's
// length differs from the number of volumes or names and columns differ in
// number.
func TaskCorrelation(p []Params, names []string, columns [][]float64) (TaskCorr, error) {
	if len(names) != len(columns) {
		return TaskCorr{}, fmt.Errorf("motion: %d regressor names for %d columns; want one name per column", len(names), len(columns))
	}
	n := len(p)
	for c, col := range columns {
		if len(col) != n {
			return TaskCorr{}, fmt.Errorf("motion: regressor %q has %d values; want %d (one per volume)", names[c], len(col), n)
		}
	}
	var best TaskCorr
	found := false
	par := make([]float64, n)
	for a := 0; a < 6; a++ {
		for t := range p {
			par[t] = p[t][a]
		}
		for c, col := range columns {
			r, ok := pearson(par, col)
			if !ok {
				continue
			}
			if !found || math.Abs(r) > math.Abs(best.R) {
				best = TaskCorr{R: r, Param: Names[a], Column: names[c]}
				found = true
			}
		}
	}
	if found && math.Abs(best.R) > TaskCorrelationWarn {
		best.Warning = fmt.Sprintf("motion parameter %s correlates with task regressor %q (r = %.2f, |r| > %g): task-correlated motion can produce false activation, and motion regressors then also remove task signal",
			best.Param, best.Column, best.R, TaskCorrelationWarn)
	}
	return best, nil
}

// pearson returns the correlation of x and y; ok is false when either has no
// variance (relative to its magnitude) or holds non-finite values.
func pearson(x, y []float64) (float64, bool) {
	n := float64(len(x))
	if len(x) < 2 {
		return 0, false
	}
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= n
	my /= n
	var sxx, syy, sxy, ax, ay float64
	for i := range x {
		dx, dy := x[i]-mx, y[i]-my
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
		ax += x[i] * x[i]
		ay += y[i] * y[i]
	}
	if !(sxx > 1e-20*ax) || !(syy > 1e-20*ay) || sxx == 0 || syy == 0 || math.IsNaN(sxy) || math.IsInf(sxy, 0) {
		return 0, false
	}
	return sxy / math.Sqrt(sxx*syy), true
}
