package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"winnow/core/motion"
	"winnow/core/nifti"
)

// realignRun writes a small int16 run of an analytic head (Gaussian blobs in a
// soft ellipsoid) translated by known amounts, evaluated exactly at each
// voxel, so the command is checked against the generating shifts.
func realignRun(t *testing.T, dir string, shifts [][3]float64) string {
	t.Helper()
	dims := [3]int{32, 32, 22}
	g := nifti.Grid{Dims: dims, VoxelMM: [3]float64{3, 3, 3}, SformCode: 1, QformCode: 1}
	g.Affine = [4][4]float64{{3, 0, 0, -46.5}, {0, 3, 0, -46.5}, {0, 0, 3, -31.5}, {0, 0, 0, 1}}
	head := func(x, y, z float64) float64 {
		rho := math.Sqrt(x*x/(40*40) + y*y/(44*44) + z*z/(28*28))
		v := 700 / (1 + math.Exp((rho-1)/0.06))
		v += 300 * math.Exp(-((x-12)*(x-12)+(y+10)*(y+10)+(z-6)*(z-6))/(2*49))
		v -= 200 * math.Exp(-((x+15)*(x+15)+(y-8)*(y-8)+(z+4)*(z+4))/(2*36))
		return v + 10
	}
	name := filepath.Join(dir, "bold.nii.gz")
	f, err := os.Create(name)
	if err != nil {
		t.Fatal(err)
	}
	w, err := nifti.NewWriter(f, g, len(shifts), 2, nifti.WriteOptions{Datatype: nifti.Int16})
	if err != nil {
		t.Fatal(err)
	}
	vol := make([]float32, g.Voxels())
	for _, s := range shifts {
		n := 0
		for k := 0; k < dims[2]; k++ {
			for j := 0; j < dims[1]; j++ {
				for i := 0; i < dims[0]; i++ {
					wv := g.World(float64(i), float64(j), float64(k))
					// The head moved by s: the volume at y shows the head at y − s.
					vol[n] = float32(head(wv[0]-s[0], wv[1]-s[1], wv[2]-s[2]))
					n++
				}
			}
		}
		if err := w.WriteVolume(vol); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	return name
}

func TestRealignCommand(t *testing.T) {
	dir := t.TempDir()
	shifts := [][3]float64{{0, 0, 0}, {0.8, 0, 0}, {0.8, -1.2, 0.5}, {0.3, -0.4, 1.5}}
	bold := realignRun(t, dir, shifts)
	out := filepath.Join(dir, "out")
	var so, se bytes.Buffer
	if err := runRealign([]string{"--bold", bold, "--out", out}, &so, &se); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(so.String(), "framewise displacement: mean") {
		t.Errorf("stdout %q", so.String())
	}
	b, err := os.ReadFile(filepath.Join(out, "motion.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	// Header per the outside contract (realign: six parameters plus FD).
	if lines[0] != "trans_x\ttrans_y\ttrans_z\trot_x\trot_y\trot_z\tframewise_displacement" || len(lines) != len(shifts)+1 {
		t.Fatalf("motion.tsv:\n%s", b)
	}
	for v, s := range shifts {
		cells := strings.Split(lines[v+1], "\t")
		for a := 0; a < 6; a++ {
			got, _ := strconv.ParseFloat(cells[a], 64)
			want := 0.0
			if a < 3 {
				want = s[a]
			}
			// Translations within 0.1 mm, rotations within 0.1° (task target).
			if math.Abs(got-want) > 0.1 {
				t.Errorf("volume %d %s = %v, want %v", v, motion.Names[a], got, want)
			}
		}
		fd, _ := strconv.ParseFloat(cells[6], 64)
		// Power et al. 2012 FD of pure translations: Σ|Δt|.
		want := 0.0
		if v > 0 {
			for a := 0; a < 3; a++ {
				want += math.Abs(s[a] - shifts[v-1][a])
			}
		}
		if math.Abs(fd-want) > 0.15 {
			t.Errorf("volume %d FD = %v, want about %v", v, fd, want)
		}
	}
	// The realigned run: same grid, int16 like the input, all volumes.
	f, err := os.Open(filepath.Join(out, "realigned.nii.gz"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rd, err := nifti.NewReader(f, nifti.Limits{})
	if err != nil {
		t.Fatal(err)
	}
	h := rd.Header()
	if h.Datatype != nifti.Int16 || h.NumVolumes() != len(shifts) || h.Dim[1] != 32 || h.Dim[3] != 22 {
		t.Errorf("output header: datatype %v, %d volumes, dims %v", h.Datatype, h.NumVolumes(), h.Dims())
	}
	if tr, ok := h.TR(); !ok || tr != 2 {
		t.Errorf("TR %v", tr)
	}
	if _, err := os.Stat(filepath.Join(out, "motion.tsv.partial")); !os.IsNotExist(err) {
		t.Error("temporary file left behind")
	}

	// Reference volume 2 (two-pass): its own row is zero.
	out2 := filepath.Join(dir, "out2")
	so.Reset()
	if err := runRealign([]string{"--bold", bold, "--out", out2, "--reference", "2"}, &so, &se); err != nil {
		t.Fatal(err)
	}
	b, _ = os.ReadFile(filepath.Join(out2, "motion.tsv"))
	row := strings.Split(strings.Split(string(b), "\n")[3], "\t")
	for a := 0; a < 6; a++ {
		if v, _ := strconv.ParseFloat(row[a], 64); math.Abs(v) > 0.02 {
			t.Errorf("reference row %s = %v, want 0", motion.Names[a], v)
		}
	}
	row = strings.Split(strings.Split(string(b), "\n")[1], "\t")
	if v, _ := strconv.ParseFloat(row[1], 64); math.Abs(v-1.2) > 0.1 {
		t.Errorf("volume 0 relative to volume 2: trans_y %v, want 1.2", v)
	}
}

func TestRealignBadInput(t *testing.T) {
	dir := t.TempDir()
	bold := realignRun(t, dir, [][3]float64{{0, 0, 0}, {1, 0, 0}})
	one := filepath.Join(t.TempDir(), "x")
	os.MkdirAll(one, 0o755)
	single := realignRun(t, one, [][3]float64{{0, 0, 0}})
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"--bold", bold}, "--out is required"},
		{[]string{"--bold", bold, "--out", dir, "--reference", "2"}, "reference volume 2; want 0 to 1"},
		{[]string{"--bold", single, "--out", dir}, "want at least 2"},
		{[]string{"--bold", filepath.Join(dir, "missing.nii"), "--out", dir}, "missing.nii"},
		{[]string{"--bold", bold, "--out", dir, "--fd-threshold", "0"}, "--fd-threshold"},
	}
	for _, c := range cases {
		var so, se bytes.Buffer
		err := runRealign(c.args, &so, &se)
		if err == nil {
			t.Errorf("%v: accepted", c.args)
			continue
		}
		if code := exitStatus(err, &se); code != 2 || !strings.Contains(se.String(), c.want) {
			t.Errorf("%v: exit %d, stderr %q; want 2 and %q", c.args, code, se.String(), c.want)
		}
	}
}
