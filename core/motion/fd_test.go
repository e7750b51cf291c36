package motion

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

func TestFramewiseDisplacementWorked(t *testing.T) {
	// Power et al. 2012: FD = Σ|Δtrans| + 50 mm·Σ|Δrot| (radians), FD_0 = 0.
	// Worked by hand: Δ = (0.1, −0.2, 0.3) mm and (0.5°, 0°, −0.25°):
	// 0.6 mm + 50·(0.75·π/180) mm = 0.6 + 0.654498469 = 1.254498469 mm.
	// Then back to zero: the same FD.
	p := []Params{{}, {0.1, -0.2, 0.3, 0.5, 0, -0.25}, {}}
	fd := FramewiseDisplacement(p)
	want := []float64{0, 1.254498469, 1.254498469}
	for i := range want {
		if math.Abs(fd[i]-want[i]) > 1e-8 {
			t.Errorf("FD[%d] = %.9f, want %.9f", i, fd[i], want[i])
		}
	}
	f := Summarise(fd, 0)
	if f.ThresholdMM != 0.5 || f.Above != 2 || math.Abs(f.MeanFDmm-1.254498469) > 1e-8 || math.Abs(f.MaxFDmm-1.254498469) > 1e-8 {
		t.Errorf("figures %+v", f)
	}
	f = Summarise([]float64{0, 0.2, 0.6, 0.4}, 0.5)
	if f.Above != 1 || math.Abs(f.MeanFDmm-0.4) > 1e-12 || f.MaxFDmm != 0.6 {
		t.Errorf("figures %+v, want mean 0.4 (over 3 differences), max 0.6, 1 above 0.5", f)
	}
	if r := f.Report(); r.MeanFDmm != f.MeanFDmm || r.MaxFDmm != f.MaxFDmm {
		t.Errorf("report %+v", r)
	}
}

func TestWriteTSV(t *testing.T) {
	p := []Params{{}, {0.1, -0.2, 0.3, 0.5, 0, -0.25}}
	var b bytes.Buffer
	if err := WriteTSV(&b, p, FramewiseDisplacement(p)); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n")
	// Header fixed by the outside contract (interface.md, realign).
	if lines[0] != "trans_x\ttrans_y\ttrans_z\trot_x\trot_y\trot_z\tframewise_displacement" {
		t.Errorf("header %q", lines[0])
	}
	if len(lines) != 3 || lines[2] != "0.100000\t-0.200000\t0.300000\t0.500000\t0.000000\t-0.250000\t1.254498" {
		t.Errorf("rows %q", lines[1:])
	}
}

func TestTaskCorrelation(t *testing.T) {
	n := 40
	task := make([]float64, n)
	other := make([]float64, n)
	ones := make([]float64, n)
	p := make([]Params, n)
	for i := 0; i < n; i++ {
		if (i/4)%2 == 1 {
			task[i] = 1
		}
		ones[i] = 1
		other[i] = math.Sin(float64(i))
		// rot_y follows the task plus an orthogonal wobble: r is known.
		p[i][4] = task[i] + 0.5*math.Cos(math.Pi*float64(i))
	}
	// Direct Pearson r of rot_y and task: cov = var(task) (the wobble
	// (−1)^i sums to zero over every 4-volume block),
	// var(rot_y) = var(task) + 0.25·var((−1)^i) = 0.25 + 0.25, so
	// r = 0.25 / sqrt(0.25 · 0.5) = 1/√2.
	tc, err := TaskCorrelation(p, []string{"intercept", "noise", "task"}, [][]float64{ones, other, task})
	if err != nil {
		t.Fatal(err)
	}
	if tc.Param != "rot_y" || tc.Column != "task" || math.Abs(tc.R-1/math.Sqrt2) > 1e-12 {
		t.Errorf("got %+v, want rot_y ~ task with r = 0.7071", tc)
	}
	if !strings.Contains(tc.Warning, "rot_y") || !strings.Contains(tc.Warning, "false activation") {
		t.Errorf("warning %q", tc.Warning)
	}
	// Below the threshold: no warning.
	for i := range p {
		p[i][4] = 0.1*task[i] + math.Cos(math.Pi*float64(i))
	}
	tc, _ = TaskCorrelation(p, []string{"task"}, [][]float64{task})
	if tc.Warning != "" || math.Abs(tc.R) > TaskCorrelationWarn {
		t.Errorf("weak correlation %+v", tc)
	}
	if _, err := TaskCorrelation(p, []string{"task"}, [][]float64{task[:10]}); err == nil || !strings.Contains(err.Error(), "task") {
		t.Errorf("short column: %v", err)
	}
}
