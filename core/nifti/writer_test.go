package nifti

import (
	"bytes"
	"encoding/binary"
	"io"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/klauspost/compress/gzip"
)

func gridOf(t *testing.T, name string) Grid {
	t.Helper()
	return mustHeader(t, name).Grid()
}

func randomVolume(n int, seed uint64, lo, hi float64) []float32 {
	rng := rand.New(rand.NewPCG(seed, 1))
	v := make([]float32, n)
	for i := range v {
		v[i] = float32(lo + (hi-lo)*rng.Float64())
	}
	return v
}

// rawHeader returns the first 352 decompressed bytes of a written file.
func rawHeader(t *testing.T, file []byte) []byte {
	t.Helper()
	zr, err := gzip.NewReader(bytes.NewReader(file))
	if err != nil {
		t.Fatal(err)
	}
	b := make([]byte, 352)
	if _, err := io.ReadFull(zr, b); err != nil {
		t.Fatal(err)
	}
	return b
}

// qformAffine is the affine the file's qform alone gives.
func qformAffine(h *Header) [4][4]float64 {
	q := *h
	q.SformCode = 0
	return q.Affine()
}

// Round trip through WriteMap and ReadImage: float32 exact, the geometry
// copied (codes included), and the header fields the methods notes (m.4)
// ask of outputs.
func TestWriteMapRoundTrip(t *testing.T) {
	for _, c := range []struct {
		file         string
		qcode, scode int
	}{
		{"dt_float32.nii", 0, 1},      // sheared sform: no qform can be derived
		{"qform_qfac_neg.nii", 1, 0},  // qform copied, qfac -1 kept
		{"sform_and_qform.nii", 1, 2}, // both copied
		{"pixdim_only.nii", 0, 0},     // diag(pixdim): no codes
		{"units_m_ms.nii", 1, 1},      // metres in, mm out; diagonal sform: qform derived
	} {
		g := gridOf(t, c.file)
		data := randomVolume(g.Voxels(), 7, -1e4, 1e4)
		var buf bytes.Buffer
		opt := WriteOptions{IntentCode: 3, IntentP: [3]float64{12, 0, 0}, Descrip: "round trip", IntentName: "t"}
		if err := WriteMap(&buf, g, data, opt); err != nil {
			t.Fatal(err)
		}
		h, got, err := ReadImage(bytes.NewReader(buf.Bytes()), Limits{})
		if err != nil {
			t.Fatalf("%s: %v", c.file, err)
		}
		for i := range data {
			if got[i] != data[i] {
				t.Fatalf("%s: value %d = %v, want %v", c.file, i, got[i], data[i])
			}
		}
		if h.Version != 1 || h.ByteOrder != binary.LittleEndian || h.VoxOffset != 352 || h.XYZTUnits != 10 ||
			h.Datatype != Float32 || h.SclSlope != 1 || h.SclInter != 0 || h.Dim[0] != 3 ||
			h.IntentCode != 3 || h.IntentP[0] != 12 || h.Descrip != "round trip" || h.IntentName != "t" {
			t.Errorf("%s: header %+v", c.file, h)
		}
		if raw := rawHeader(t, buf.Bytes()); !bytes.Equal(raw[348:352], []byte{0, 0, 0, 0}) {
			t.Errorf("%s: extension bytes %v", c.file, raw[348:352])
		}
		if h.QformCode != c.qcode || h.SformCode != c.scode {
			t.Errorf("%s: codes q %d s %d, want q %d s %d", c.file, h.QformCode, h.SformCode, c.qcode, c.scode)
		}
		// float32 storage of the transform: 1e-6 relative
		checkAffine(t, c.file, h.Affine(), g.Affine, tolFloat32)
		if c.qcode > 0 {
			// a copied qform gives the source's qform affine; a derived one
			// gives the grid's affine
			want := g.Affine
			if src := mustHeader(t, c.file); src.QformCode > 0 {
				want = qformAffine(src)
			}
			checkAffine(t, c.file+" qform", qformAffine(h), want, tolFloat32)
		}
		if h.Grid().VoxelMM != g.VoxelMM {
			for k := range 3 {
				if !near(h.Grid().VoxelMM[k], g.VoxelMM[k], tolFloat32) {
					t.Errorf("%s: VoxelMM %v, want %v", c.file, h.Grid().VoxelMM, g.VoxelMM)
				}
			}
		}
	}
}

// A Grid built from an affine alone (no codes, no quaternion) is written
// with that affine as sform_code 2 and a qform derived from it that gives
// the same affine.
func TestWriteDerivedQform(t *testing.T) {
	// rotation of 20 degrees about z, voxels 3 x 3 x 4, a flip of x
	th := 20 * math.Pi / 180
	cs, sn := math.Cos(th), math.Sin(th)
	A := [4][4]float64{{-3 * cs, -3 * sn, 0, 91}, {-3 * sn, 3 * cs, 0, -126}, {0, 0, 4, -72}, {0, 0, 0, 1}}
	g := Grid{Dims: [3]int{5, 4, 3}, VoxelMM: [3]float64{3, 3, 4}, Affine: A}
	var buf bytes.Buffer
	if err := WriteMap(&buf, g, make([]float32, 60), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	h, _, err := ReadImage(bytes.NewReader(buf.Bytes()), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	if h.SformCode != 2 || h.QformCode != 2 {
		t.Fatalf("codes q %d s %d, want 2 2", h.QformCode, h.SformCode)
	}
	if h.Pixdim[0] != -1 {
		t.Errorf("qfac %v, want -1 (the affine has a negative determinant)", h.Pixdim[0])
	}
	checkAffine(t, "sform", h.Affine(), A, tolFloat32)
	checkAffine(t, "qform", qformAffine(h), A, tolFloat32)
}

// Integer output: values as given, rounded to nearest and clamped to the
// type's range, or stored = round((v - inter)/slope) with SclSlope set; NaN
// stored as 0 (task contract, documented on WriteOptions). Read back with
// value = slope*stored + inter (methods notes m.3).
func TestWriteIntegers(t *testing.T) {
	g := gridOf(t, "map3d_float32.nii") // 24 voxels
	in := randomVolume(g.Voxels(), 3, -300, 300)
	in[0], in[1], in[2], in[3] = 40000, -40000, float32(math.NaN()), 2.5
	for _, c := range []struct {
		dt           Datatype
		slope, inter float64
		lo, hi       float64
	}{
		{Int16, 0, 0, math.MinInt16, math.MaxInt16},
		{Int16, 0.01, 5, 5 + 0.01*math.MinInt16, 5 + 0.01*math.MaxInt16},
		{Uint8, 0, 0, 0, 255},
		{Uint8, 2, -200, -200, -200 + 2*255},
	} {
		var buf bytes.Buffer
		if err := WriteMap(&buf, g, in, WriteOptions{Datatype: c.dt, SclSlope: c.slope, SclInter: c.inter}); err != nil {
			t.Fatal(err)
		}
		h, got, err := ReadImage(bytes.NewReader(buf.Bytes()), Limits{})
		if err != nil {
			t.Fatal(err)
		}
		if h.Datatype != c.dt {
			t.Errorf("datatype %s", h.Datatype)
		}
		step := 1.0
		if c.slope != 0 {
			step = c.slope
		}
		for i, v := range in {
			want := math.Min(math.Max(float64(v), c.lo), c.hi) // clamped
			if math.IsNaN(float64(v)) {
				want = c.inter // NaN stored as 0
			}
			// round to nearest: within half a step (plus float32 slack)
			if math.Abs(float64(got[i])-want) > step/2+1e-4*step {
				t.Errorf("%s slope %v: value %d = %v, wrote %v", c.dt, c.slope, i, got[i], v)
			}
		}
		if c.slope == 0 && c.dt == Int16 && got[3] != 2 && got[3] != 3 {
			t.Errorf("2.5 stored as %v", got[3])
		}
	}
	if err := WriteMap(io.Discard, g, in, WriteOptions{Datatype: Float64}); err == nil ||
		!strings.Contains(err.Error(), "float64") {
		t.Errorf("float64 output: %v", err)
	}
}

// 4D output: pixdim[4] = TR in seconds with xyzt_units mm+s, dim[4] = volumes
// (methods notes m.4); float32 round trip exact (identity).
func TestWriter4D(t *testing.T) {
	g := gridOf(t, "dt_int16.nii")
	var buf bytes.Buffer
	w, err := NewWriter(&buf, g, 3, 2.5, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var want []float32
	for v := range 3 {
		vol := randomVolume(g.Voxels(), uint64(v), 0, 1000)
		want = append(want, vol...)
		if err := w.WriteVolume(vol); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.WriteVolume(make([]float32, g.Voxels())); err == nil {
		t.Error("a fourth volume was accepted")
	}
	w2, err := NewWriter(io.Discard, g, 3, 2.5, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w2.Close(); err == nil || !strings.Contains(err.Error(), "0 of 3 volumes") {
		t.Errorf("Close after 0 of 3 volumes: %v", err)
	}
	if err := w.Close(); err == nil {
		t.Error("writer with a refused extra volume closed cleanly")
	}

	buf.Reset()
	w, _ = NewWriter(&buf, g, 3, 2.5, WriteOptions{})
	for v := range 3 {
		if err := w.WriteVolume(want[v*g.Voxels() : (v+1)*g.Voxels()]); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := NewReader(bytes.NewReader(buf.Bytes()), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	h := r.Header()
	if tr, ok := h.TR(); !ok || tr != 2.5 {
		t.Errorf("TR %v %v, want 2.5", tr, ok)
	}
	if d := h.Dims(); len(d) != 4 || d[3] != 3 {
		t.Errorf("dims %v", d)
	}
	got := readAll(t, r)
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("value %d = %v, want %v", i, got[i], want[i])
		}
	}
}

// An uncompressed stream reads back like the gzip one (round trip).
func TestWriterUncompressed(t *testing.T) {
	g := Grid{Dims: [3]int{3, 2, 2}, VoxelMM: [3]float64{2, 2, 2}, Affine: [4][4]float64{{2, 0, 0, 0}, {0, 2, 0, 0}, {0, 0, 2, 0}, {0, 0, 0, 1}}, SformCode: 1}
	var b bytes.Buffer
	w, err := NewWriter(&b, g, 2, 1.5, WriteOptions{Datatype: Int16, Uncompressed: true})
	if err != nil {
		t.Fatal(err)
	}
	vols := [][]float32{{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}, {-1, -2, -3, -4, -5, -6, -7, -8, -9, -10, -11, -12}}
	for _, v := range vols {
		if err := w.WriteVolume(v); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if b.Bytes()[0] == 0x1f {
		t.Fatal("stream is gzip")
	}
	if got, want := b.Len(), 352+2*12*2; got != want {
		t.Fatalf("%d bytes, want %d (header, extension bytes, data)", got, want)
	}
	r, err := NewReader(bytes.NewReader(b.Bytes()), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	got := make([]float32, 12)
	for _, v := range vols {
		if err := r.ReadVolume(got); err != nil {
			t.Fatal(err)
		}
		for i := range v {
			if got[i] != v[i] {
				t.Fatalf("voxel %d: %v, want %v", i, got[i], v[i])
			}
		}
	}
}
