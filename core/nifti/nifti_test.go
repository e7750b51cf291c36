package nifti

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/klauspost/compress/gzip"
)

// The fixtures in testdata/nifti are written by scripts/fixtures/make_nifti.py
// (Python struct packing of the published nifti1.h / nifti2.h layouts, no
// shared code with this package); manifest.json holds what each file must
// decode to, computed there.
const testdataDir = "../../testdata/nifti"

// Named tolerances.
const (
	tolFloat32 = 1e-6 // relative: values and affines stored as float32
	tolClosed  = 1e-12
)

type manifestEntry struct {
	File         string        `json:"file"`
	Img          string        `json:"img"`
	Note         string        `json:"note"`
	Error        string        `json:"error"`
	ErrorStage   string        `json:"error_stage"`
	Version      int           `json:"version"`
	ByteOrder    string        `json:"byte_order"`
	Datatype     string        `json:"datatype"`
	Dims         []int         `json:"dims"`
	TR           *float64      `json:"tr_s"`
	Scaled       bool          `json:"scaled"`
	SclSlope     float64       `json:"scl_slope"`
	SclInter     float64       `json:"scl_inter"`
	QformCode    int           `json:"qform_code"`
	SformCode    int           `json:"sform_code"`
	AffineSource string        `json:"affine_source"`
	Affine       [4][4]float64 `json:"affine"`
	VoxelMM      [3]float64    `json:"voxel_mm"`
	DataBytes    int64         `json:"data_bytes"`
	Values       []float64     `json:"values"`
}

func loadManifest(t testing.TB) []manifestEntry {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(testdataDir, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m struct {
		Files []manifestEntry `json:"files"`
	}
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	if len(m.Files) < 30 {
		t.Fatalf("manifest lists %d files, want the full fixture set", len(m.Files))
	}
	return m.Files
}

func readFixture(t testing.TB, name string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(testdataDir, name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func openEntry(t testing.TB, e manifestEntry, lim Limits) (*Reader, error) {
	t.Helper()
	if e.Img != "" {
		return NewPairReader(bytes.NewReader(readFixture(t, e.File)), bytes.NewReader(readFixture(t, e.Img)), lim)
	}
	return NewReader(bytes.NewReader(readFixture(t, e.File)), lim)
}

// readAll reads every volume and checks that io.EOF follows the last one.
func readAll(t testing.TB, r *Reader) []float32 {
	t.Helper()
	h := r.Header()
	vol := make([]float32, h.VolumeVoxels())
	var all []float32
	for v := 0; v < h.NumVolumes(); v++ {
		if err := r.ReadVolume(vol); err != nil {
			t.Fatalf("volume %d: %v", v+1, err)
		}
		all = append(all, vol...)
	}
	if err := r.ReadVolume(vol); err != io.EOF {
		t.Fatalf("after the last volume: got %v, want io.EOF", err)
	}
	return all
}

func near(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*(1+math.Abs(want))
}

func checkAffine(t *testing.T, name string, got, want [4][4]float64, rel float64) {
	t.Helper()
	for r := range 4 {
		for c := range 4 {
			if !near(got[r][c], want[r][c], rel) {
				t.Errorf("%s: affine[%d][%d] = %.9g, want %.9g", name, r, c, got[r][c], want[r][c])
			}
		}
	}
}

func TestFixtures(t *testing.T) {
	for _, e := range loadManifest(t) {
		if e.Error != "" {
			continue
		}
		t.Run(e.File, func(t *testing.T) {
			r, err := openEntry(t, e, Limits{})
			if err != nil {
				t.Fatal(err)
			}
			h := r.Header()
			order := "little"
			if h.ByteOrder == binary.BigEndian {
				order = "big"
			}
			if h.Version != e.Version || order != e.ByteOrder || h.Datatype.String() != e.Datatype {
				t.Errorf("version %d %s %s, want %d %s %s", h.Version, order, h.Datatype, e.Version, e.ByteOrder, e.Datatype)
			}
			if !reflect.DeepEqual(h.Dims(), e.Dims) {
				t.Errorf("dims %v, want %v", h.Dims(), e.Dims)
			}
			if h.DataBytes() != e.DataBytes {
				t.Errorf("DataBytes %d, want %d", h.DataBytes(), e.DataBytes)
			}
			tr, ok := h.TR()
			if ok != (e.TR != nil) || ok && !near(tr, *e.TR, tolClosed) {
				t.Errorf("TR %v %v, want %v", tr, ok, e.TR)
			}
			slope, inter := h.Scaling()
			if !near(slope, e.SclSlope, tolClosed) || !near(inter, e.SclInter, tolClosed) {
				t.Errorf("scaling %v %v, want %v %v", slope, inter, e.SclSlope, e.SclInter)
			}
			// Affines: the generator computed them in float64 from the
			// float32-rounded stored fields; 1e-6 covers summation order.
			checkAffine(t, e.File, h.Affine(), e.Affine, tolFloat32)
			g := h.Grid()
			for k := range 3 {
				if !near(g.VoxelMM[k], e.VoxelMM[k], tolFloat32) {
					t.Errorf("VoxelMM %v, want %v", g.VoxelMM, e.VoxelMM)
				}
			}
			got := readAll(t, r)
			if len(got) != len(e.Values) {
				t.Fatalf("%d values, want %d", len(got), len(e.Values))
			}
			for i, w := range e.Values {
				want := float32(w)
				if e.Scaled {
					if !near(float64(got[i]), float64(want), tolFloat32) {
						t.Fatalf("value %d = %v, want %v", i, got[i], want)
					}
				} else if got[i] != want {
					// unscaled: the float32 conversion is exact or correctly rounded
					t.Fatalf("value %d = %v, want %v", i, got[i], want)
				}
			}
			// The streaming path (bufio, as for files and Blob readers) gives
			// the same values as the in-memory *bytes.Reader path.
			if e.Img == "" {
				sr, err := NewReader(streamOnly{bytes.NewReader(readFixture(t, e.File))}, Limits{})
				if err != nil {
					t.Fatal(err)
				}
				if !reflect.DeepEqual(readAll(t, sr), got) {
					t.Error("streaming path decodes differently")
				}
			}
			in := Describe(h)
			if in.Version != e.Version || in.Datatype != e.Datatype || in.ByteOrder != e.ByteOrder ||
				in.QformCode != e.QformCode || in.SformCode != e.SformCode || in.DataBytes != e.DataBytes {
				t.Errorf("Describe = %+v", in)
			}
		})
	}
}

func TestBadFixtures(t *testing.T) {
	n := 0
	for _, e := range loadManifest(t) {
		if e.Error == "" {
			continue
		}
		n++
		t.Run(e.File, func(t *testing.T) {
			r, err := openEntry(t, e, Limits{})
			if e.ErrorStage == "header" {
				if err == nil || !strings.Contains(err.Error(), e.Error) {
					t.Fatalf("got %v, want an error containing %q", err, e.Error)
				}
				if !strings.HasPrefix(err.Error(), "nifti: ") {
					t.Errorf("error %q lacks the package prefix", err)
				}
				return
			}
			if err != nil {
				t.Fatalf("header: %v", err)
			}
			vol := make([]float32, r.Header().VolumeVoxels())
			for range r.Header().NumVolumes() + 1 {
				if err = r.ReadVolume(vol); err != nil {
					break
				}
			}
			if err == nil || err == io.EOF || !strings.Contains(err.Error(), e.Error) {
				t.Fatalf("got %v, want an error containing %q", err, e.Error)
			}
			if strings.HasPrefix(e.File, "bad_truncated") {
				var te *TruncatedError
				if !errors.As(err, &te) || !errors.Is(err, io.ErrUnexpectedEOF) {
					t.Fatalf("%v is not a *TruncatedError wrapping io.ErrUnexpectedEOF", err)
				}
			}
		})
	}
	if n < 10 {
		t.Fatalf("only %d bad fixtures", n)
	}
}

func TestErrorTypes(t *testing.T) {
	// Messages as in ARCHITECTURE.md.
	for _, c := range []struct {
		file string
		typ  any
	}{
		{"bad_dim0.nii", new(*FieldError)},
		{"bad_complex64.nii", new(*UnsupportedError)},
		{"bad_sizeof_hdr.nii", new(*FieldError)},
	} {
		_, err := NewReader(bytes.NewReader(readFixture(t, c.file)), Limits{})
		if err == nil || !errors.As(err, c.typ) {
			t.Errorf("%s: %v (%T), want %T", c.file, err, err, c.typ)
		}
	}
	_, err := NewReader(bytes.NewReader(readFixture(t, "bad_dim0.nii")), Limits{})
	if got, want := err.Error(), "nifti: dim[0] = 9, want 1 to 7"; got != want {
		t.Errorf("got %q, want %q", got, want)
	}
	e := &TruncatedError{Volume: 137, Volumes: 200, Err: io.ErrUnexpectedEOF}
	if got, want := e.Error(), "nifti: volume 137 of 200: unexpected EOF"; got != want {
		t.Errorf("got %q, want %q", got, want)
	}
	u := &UnsupportedError{Datatype: Complex64}
	if !strings.HasPrefix(u.Error(), "nifti: unsupported datatype 32 (complex64); want ") {
		t.Errorf("got %q", u.Error())
	}
}

// Every prefix of a header gives io.ErrUnexpectedEOF from ReadHeader, and
// every prefix of a whole file gives some error (never a panic) from the
// reader (style guide: the truncation tests of compress/gzip and
// encoding/binary).
func TestPrefixes(t *testing.T) {
	files := []string{"dt_int16.nii", "be_float64.nii", "n2_float32.nii", "n2_be_float32.nii", "extension.nii", "gz_int16.nii.gz"}
	for _, name := range files {
		data := readFixture(t, name)
		if !strings.HasSuffix(name, ".gz") {
			hsize := sizeNIfTI1
			if strings.HasPrefix(name, "n2") {
				hsize = sizeNIfTI2
			}
			for n := range hsize {
				_, err := ReadHeader(bytes.NewReader(data[:n]))
				if !errors.Is(err, io.ErrUnexpectedEOF) {
					t.Fatalf("%s: ReadHeader of %d bytes: %v, want io.ErrUnexpectedEOF", name, n, err)
				}
			}
			if _, err := ReadHeader(bytes.NewReader(data[:hsize])); err != nil {
				t.Fatalf("%s: whole header: %v", name, err)
			}
		}
		for n := range 2 * len(data) {
			var src io.Reader = bytes.NewReader(data[:n%len(data)])
			if n >= len(data) {
				src = streamOnly{src} // the bufio path
			}
			r, err := NewReader(src, Limits{})
			if err == nil {
				vol := make([]float32, r.Header().VolumeVoxels())
				for err == nil {
					err = r.ReadVolume(vol)
				}
			}
			if err == io.EOF {
				t.Fatalf("%s: prefix of %d of %d bytes read cleanly", name, n%len(data), len(data))
			}
			if !errors.Is(err, io.ErrUnexpectedEOF) {
				t.Fatalf("%s: prefix of %d bytes: %v, want io.ErrUnexpectedEOF", name, n%len(data), err)
			}
		}
	}
}

// A big-endian file decodes to the same header and values as its
// little-endian twin (same generator parameters, other byte order).
func TestByteSwapped(t *testing.T) {
	for _, p := range [][2]string{
		{"dt_int16.nii", "be_int16.nii"},
		{"dt_float32.nii", "be_float32.nii"},
		{"dt_float64.nii", "be_float64.nii"},
		{"dt_uint64.nii", "be_uint64.nii"},
		{"n2_float32.nii", "n2_be_float32.nii"},
	} {
		var hs [2]*Header
		var vs [2][]float32
		for i, name := range p {
			r, err := NewReader(bytes.NewReader(readFixture(t, name)), Limits{})
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			hs[i], vs[i] = r.Header(), readAll(t, r)
		}
		if hs[0].ByteOrder != binary.LittleEndian || hs[1].ByteOrder != binary.BigEndian {
			t.Errorf("%v: byte orders %v, %v", p, hs[0].ByteOrder, hs[1].ByteOrder)
		}
		a, b := *hs[0], *hs[1]
		a.ByteOrder, b.ByteOrder = nil, nil
		if !reflect.DeepEqual(a, b) {
			t.Errorf("%v: headers differ:\n%+v\n%+v", p, a, b)
		}
		if !reflect.DeepEqual(vs[0], vs[1]) {
			t.Errorf("%v: values differ", p)
		}
	}
}

// The qform formula on worked cases.
func TestQuaternion(t *testing.T) {
	// By hand: (b, c, d) = (0, 0, 1) gives a = 0, a rotation of 180 degrees
	// about z: R = diag(-1, -1, 1).
	checkRot(t, quaternRotation(0, 0, 1), [3][3]float64{{-1, 0, 0}, {0, -1, 0}, {0, 0, 1}})
	// By hand: 90 degrees about x, (a, b) = (cos 45°, sin 45°): y -> z, z -> -y.
	s := math.Sqrt(0.5)
	checkRot(t, quaternRotation(s, 0, 0), [3][3]float64{{1, 0, 0}, {0, 0, -1}, {0, 1, 0}})
	// (b, c, d) slightly outside the unit ball: a = 0 and (b, c, d) renormalised
	// (methods notes m.4), so this equals the (0, 0, 1) case.
	checkRot(t, quaternRotation(0, 0, 1+1e-7), [3][3]float64{{-1, 0, 0}, {0, -1, 0}, {0, 0, 1}})

	// The generator's qform fixture: 30 degrees about (1,2,2)/3, qfac -1.
	// make_nifti.py computes the expected affine from the float32-stored
	// fields with the same formula and asserts it matches Rodrigues'
	// rotation formula for that axis and angle to 1e-6.
	for _, e := range loadManifest(t) {
		if e.AffineSource != "qform" {
			continue
		}
		r, err := openEntry(t, e, Limits{})
		if err != nil {
			t.Fatal(err)
		}
		h := r.Header()
		checkAffine(t, e.File, h.Affine(), e.Affine, tolFloat32)
		// Identity: the 3x3 part is R diag(p1, p2, qfac p3), so its
		// determinant is qfac p1 p2 p3.
		A := h.Affine()
		det := A[0][0]*(A[1][1]*A[2][2]-A[1][2]*A[2][1]) - A[0][1]*(A[1][0]*A[2][2]-A[1][2]*A[2][0]) + A[0][2]*(A[1][0]*A[2][1]-A[1][1]*A[2][0])
		want := qfac(h.Pixdim[0]) * h.Pixdim[1] * h.Pixdim[2] * h.Pixdim[3]
		if !near(det, want, 1e-6) {
			t.Errorf("%s: det %v, want %v", e.File, det, want)
		}
	}
}

func checkRot(t *testing.T, got, want [3][3]float64) {
	t.Helper()
	for r := range 3 {
		for c := range 3 {
			if math.Abs(got[r][c]-want[r][c]) > tolClosed {
				t.Fatalf("R = %v, want %v", got, want)
			}
		}
	}
}

// Identity: matrix -> quaternion -> matrix is the identity map on rotations,
// for both signs of qfac and all four branches of the inverse formula.
func TestQuaternionRoundTrip(t *testing.T) {
	quats := [][3]float64{
		{0.1, -0.2, 0.3}, {0.9, 0.1, 0.1}, {0.1, 0.95, -0.1}, {-0.1, 0.1, 0.97},
		{0, 0, 1}, {1, 0, 0}, {0, 0, 0}, {0.5, 0.5, 0.5},
	}
	for _, q := range quats {
		for _, qf := range []float64{1, -1} {
			pix := [3]float64{2, 2.5, 3}
			A := quaternAffine(q[0], q[1], q[2], 1, 2, 3, pix, qf)
			b, c, d, qf2, pix2, ok := quaternFromAffine(A)
			if !ok || qf2 != qf {
				t.Fatalf("%v qfac %v: ok %v qfac %v", q, qf, ok, qf2)
			}
			B := quaternAffine(b, c, d, 1, 2, 3, pix2, qf2)
			for r := range 3 {
				for col := range 3 {
					if math.Abs(A[r][col]-B[r][col]) > 1e-12 {
						t.Fatalf("%v qfac %v: %v, want %v", q, qf, B, A)
					}
				}
			}
		}
	}
	// A sheared matrix has no qform.
	sheared := [4][4]float64{{2, 0.5, 0, 0}, {0, 2, 0, 0}, {0, 0, 2, 0}, {0, 0, 0, 1}}
	if _, _, _, _, _, ok := quaternFromAffine(sheared); ok {
		t.Error("sheared affine accepted")
	}
}

// Identity: A · A⁻¹ = I.
func TestInverse(t *testing.T) {
	for _, e := range loadManifest(t) {
		if e.Error != "" {
			continue
		}
		g := Grid{Affine: e.Affine}
		inv, err := g.Inverse()
		if err != nil {
			t.Fatalf("%s: %v", e.File, err)
		}
		for r := range 4 {
			for c := range 4 {
				var s float64
				for k := range 4 {
					s += e.Affine[r][k] * inv[k][c]
				}
				want := 0.0
				if r == c {
					want = 1
				}
				if math.Abs(s-want) > 1e-12 {
					t.Fatalf("%s: (A A^-1)[%d][%d] = %v", e.File, r, c, s)
				}
			}
		}
		// World then inverse returns the voxel.
		w := Grid{Affine: e.Affine}.World(1, 2, 3)
		var v [3]float64
		for r := range 3 {
			v[r] = inv[r][0]*w[0] + inv[r][1]*w[1] + inv[r][2]*w[2] + inv[r][3]
		}
		if math.Abs(v[0]-1)+math.Abs(v[1]-2)+math.Abs(v[2]-3) > 1e-9 {
			t.Fatalf("%s: round trip gives %v", e.File, v)
		}
	}
	if _, err := (Grid{}).Inverse(); err != ErrSingular {
		t.Errorf("zero affine: %v, want ErrSingular", err)
	}
}

// Index order i + nx*(j + ny*k): ARCHITECTURE.md data conventions, which
// follow NIfTI storage order (x fastest; methods notes m.3).
func TestGrid(t *testing.T) {
	g := Grid{Dims: [3]int{4, 3, 2}}
	if g.Voxels() != 24 || g.Index(1, 2, 1) != 1+4*(2+3*1) {
		t.Errorf("Voxels %d Index %d", g.Voxels(), g.Index(1, 2, 1))
	}
	defer func() {
		if recover() == nil {
			t.Error("Index outside the grid did not panic")
		}
	}()
	g.Index(4, 0, 0)
}

// SameSpace tolerance 1e-4 mm: ARCHITECTURE.md (core/nifti, Grid.SameSpace).
func TestSameSpace(t *testing.T) {
	h := mustHeader(t, "dt_int16.nii")
	g := h.Grid()
	o := g
	o.Affine[0][3] += 5e-5
	if !g.SameSpace(o) {
		t.Error("5e-5 mm apart: not the same space")
	}
	o.Affine[0][3] += 1e-3
	if g.SameSpace(o) {
		t.Error("1e-3 mm apart: same space")
	}
	o = g
	o.Dims[2]++
	if g.SameSpace(o) {
		t.Error("different dims: same space")
	}
}

func mustHeader(t testing.TB, name string) *Header {
	t.Helper()
	h, err := ReadHeader(bytes.NewReader(readFixture(t, name)))
	if err != nil {
		t.Fatal(err)
	}
	return h
}

// Limits: DataBytes against Limits.MaxDataBytes before any allocation, and
// dims whose product overflows int64 refused (ARCHITECTURE.md; style guide
// §3, image.DecodeConfig before Decode).
func TestLimits(t *testing.T) {
	data := readFixture(t, "dt_int16.nii") // 144 data bytes
	if _, err := NewReader(bytes.NewReader(data), Limits{MaxDataBytes: 144}); err != nil {
		t.Fatalf("at the limit: %v", err)
	}
	_, err := NewReader(bytes.NewReader(data), Limits{MaxDataBytes: 143})
	var fe *FieldError
	if !errors.As(err, &fe) || fe.Field != "data size" {
		t.Fatalf("over the limit: %v, want a data size FieldError", err)
	}

	// NIfTI-1 dims 32767^4 float32: 4.6e18 bytes, over the default 4 GiB
	// budget; refused before the volume buffer is allocated. dim is int16[8]
	// at offset 40 (nifti1.h).
	big := bytes.Clone(readFixture(t, "dt_float32.nii"))
	for k, v := range []int16{4, 32767, 32767, 32767, 32767, 1, 1, 1} {
		binary.LittleEndian.PutUint16(big[40+2*k:], uint16(v))
	}
	h, err := ReadHeader(bytes.NewReader(big))
	if err != nil {
		t.Fatal(err)
	}
	if h.DataBytes() != 4*32767*32767*32767*32767 {
		t.Errorf("DataBytes %d", h.DataBytes())
	}
	if _, err := NewReader(bytes.NewReader(big), Limits{}); !errors.As(err, &fe) || fe.Field != "data size" {
		t.Fatalf("huge image: %v, want a data size FieldError", err)
	}

	// NIfTI-2 dims whose product overflows int64: dim is int64[8] at
	// offset 16 (nifti2.h).
	ov := bytes.Clone(readFixture(t, "n2_float32.nii"))
	for k, v := range []int64{4, 1 << 40, 1 << 40, 2, 2, 1, 1, 1} {
		binary.LittleEndian.PutUint64(ov[16+8*k:], uint64(v))
	}
	if _, err := ReadHeader(bytes.NewReader(ov)); !errors.As(err, &fe) || fe.Field != "dim" {
		t.Fatalf("overflowing dims: %v, want a dim FieldError", err)
	}
}

// ReadImage returns the first volume; a gzip stream's CRC-32 (RFC 1952,
// trailer bytes -8..-5) is checked once the stream is read to its end.
func TestReadImage(t *testing.T) {
	h, vol, err := ReadImage(bytes.NewReader(readFixture(t, "map3d_float32.nii")), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	if len(vol) != 24 || len(h.Dims()) != 3 {
		t.Fatalf("%d values, dims %v", len(vol), h.Dims())
	}
	if _, ok := h.TR(); ok {
		t.Error("3D image has a TR")
	}
	// First volume of a 4D file.
	_, vol, err = ReadImage(bytes.NewReader(readFixture(t, "gz_int16.nii.gz")), Limits{})
	if err != nil || len(vol) != 24 {
		t.Fatalf("%v, %d values", err, len(vol))
	}
	// A gzip file with a bad checksum is reported after the last volume.
	gz := bytes.Clone(readFixture(t, "gz_int16.nii.gz"))
	gz[len(gz)-8] ^= 0xff // CRC-32 is the 8th-to-last..5th-to-last byte (RFC 1952)
	r, err := NewReader(bytes.NewReader(gz), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	vol = make([]float32, 24)
	for err == nil {
		err = r.ReadVolume(vol)
	}
	if err == io.EOF || !strings.Contains(err.Error(), "checksum") {
		t.Fatalf("bad CRC: %v", err)
	}
}

// Magic "n+1" marks a single file and "ni1" a .hdr/.img pair (nifti1.h,
// methods notes m.1).
func TestPairMismatch(t *testing.T) {
	// A single-file header handed to NewPairReader, and a pair header to NewReader.
	_, err := NewPairReader(bytes.NewReader(readFixture(t, "dt_int16.nii")), bytes.NewReader(nil), Limits{})
	if err == nil || !strings.Contains(err.Error(), "magic") {
		t.Errorf("got %v", err)
	}
	_, err = NewReader(bytes.NewReader(readFixture(t, "pair_int16.hdr")), Limits{})
	if err == nil || !strings.Contains(err.Error(), `magic = "ni1"`) {
		t.Errorf("got %v", err)
	}
}

func TestDatatype(t *testing.T) {
	// Codes and sizes from nifti1.h (bitpix / 8).
	for _, c := range []struct {
		d    Datatype
		name string
		size int
	}{
		{Uint8, "uint8", 1}, {Int16, "int16", 2}, {Int32, "int32", 4}, {Float32, "float32", 4},
		{Complex64, "complex64", 8}, {Float64, "float64", 8}, {RGB24, "rgb24", 3}, {Int8, "int8", 1},
		{Uint16, "uint16", 2}, {Uint32, "uint32", 4}, {Int64, "int64", 8}, {Uint64, "uint64", 8},
		{Float128, "float128", 16}, {Complex128, "complex128", 16}, {Complex256, "complex256", 32},
		{RGBA32, "rgba32", 4},
	} {
		if c.d.String() != c.name || c.d.Size() != c.size {
			t.Errorf("%d: %s %d, want %s %d", int(c.d), c.d, c.d.Size(), c.name, c.size)
		}
	}
	if Datatype(3).String() != "datatype 3" || Datatype(3).Size() != 0 {
		t.Error("unknown code")
	}
}

// Units: xyzt_units time bits 8 s, 16 ms, 24 µs, 32 Hz; unit 0 taken as
// seconds with a warning (methods notes m.4, from nifti1.h).
func TestWarnings(t *testing.T) {
	h := mustHeader(t, "dt_int16.nii")
	if w := h.Warnings(); len(w) != 0 {
		t.Errorf("units mm+s: %v", w)
	}
	h.XYZTUnits = 0
	if w := h.Warnings(); len(w) != 2 {
		t.Errorf("no units: %v", w)
	}
	if tr, ok := h.TR(); !ok || tr != 2 {
		t.Errorf("unit 0 TR %v %v, want 2 s (assumed seconds)", tr, ok)
	}
	h.XYZTUnits = 2 | 32 // Hz is not a time
	if _, ok := h.TR(); ok {
		t.Error("Hz gives a TR")
	}
}

func TestDescribeJSON(t *testing.T) {
	for _, c := range []struct {
		file string
		tr   any
	}{{"dt_int16.nii", 2.0}, {"map3d_float32.nii", nil}, {"be_int16.nii", 2.0}} {
		b, err := json.Marshal(Describe(mustHeader(t, c.file)))
		if err != nil {
			t.Fatal(err)
		}
		var m map[string]any
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		// keys from interface.md (info --json), plus version
		keys := []string{"dims", "voxel_mm", "tr_s", "datatype", "byte_order", "scl_slope", "scl_inter",
			"qform_code", "sform_code", "affine", "data_bytes", "version"}
		if len(m) != len(keys) {
			t.Errorf("%s: %d keys, want %d: %s", c.file, len(m), len(keys), b)
		}
		for _, k := range keys {
			if _, ok := m[k]; !ok {
				t.Errorf("%s: key %q missing", c.file, k)
			}
		}
		if m["tr_s"] != c.tr {
			t.Errorf("%s: tr_s %v, want %v", c.file, m["tr_s"], c.tr)
		}
		if aff, ok := m["affine"].([]any); !ok || len(aff) != 4 {
			t.Errorf("%s: affine %v", c.file, m["affine"])
		}
	}
	if txt := Describe(mustHeader(t, "scaled_int16.nii")).Text(); !strings.Contains(txt, "value = 0.5 * stored + -10") {
		t.Errorf("scaled Text:\n%s", txt)
	}
	txt := Describe(mustHeader(t, "be_int16.nii")).Text()
	for _, s := range []string{"NIfTI-1, big-endian", "4 x 3 x 2 x 3", "int16", "TR (s)       2", "qform_code 0, sform_code 1"} {
		if !strings.Contains(txt, s) {
			t.Errorf("Text lacks %q:\n%s", s, txt)
		}
	}
}

// A caller's wrong slice length is a broken contract and panics with the
// package prefix (ARCHITECTURE.md, Errors).
func TestReadVolumePanicsOnWrongLength(t *testing.T) {
	r, err := NewReader(bytes.NewReader(readFixture(t, "dt_int16.nii")), Limits{})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if p := recover(); p == nil || !strings.HasPrefix(p.(string), "nifti: ") {
			t.Errorf("recover() = %v", p)
		}
	}()
	r.ReadVolume(make([]float32, 5))
}

// decode against encoding/binary.Read (an independent decoder) for every
// supported datatype, both byte orders and lengths that exercise the
// unrolled loops' tails.
func TestDecodeAgainstBinaryRead(t *testing.T) {
	for _, dt := range supported {
		for _, order := range []binary.ByteOrder{binary.LittleEndian, binary.BigEndian} {
			for n := range 11 {
				raw := make([]byte, n*dt.Size())
				for i := range raw {
					raw[i] = byte(i*37 + n*11 + int(dt))
				}
				want := make([]float64, n)
				rd := bytes.NewReader(raw)
				for i := range want {
					switch dt {
					case Uint8, Int8, Int16, Uint16, Int32, Uint32, Int64, Uint64:
						var v any
						switch dt {
						case Uint8:
							v = new(uint8)
						case Int8:
							v = new(int8)
						case Int16:
							v = new(int16)
						case Uint16:
							v = new(uint16)
						case Int32:
							v = new(int32)
						case Uint32:
							v = new(uint32)
						case Int64:
							v = new(int64)
						case Uint64:
							v = new(uint64)
						}
						if err := binary.Read(rd, order, v); err != nil {
							t.Fatal(err)
						}
						want[i] = reflect.ValueOf(v).Elem().Convert(reflect.TypeFor[float64]()).Float()
					case Float32:
						var f float32
						binary.Read(rd, order, &f)
						want[i] = float64(f)
					case Float64:
						binary.Read(rd, order, &want[i])
					}
				}
				for _, sc := range [][2]float64{{1, 0}, {0.5, -3}} {
					got := make([]float32, n)
					decode(got, raw, dt, order == binary.BigEndian, sc[0], sc[1], sc[0] != 1)
					for i := range got {
						w := float32(want[i]*sc[0] + sc[1])
						if got[i] != w && !(got[i] != got[i] && w != w) {
							t.Fatalf("%s %v n=%d scale %v: value %d = %v, want %v", dt, order, n, sc, i, got[i], w)
						}
					}
				}
			}
		}
	}
}

// Bytes after the image data inside a gzip stream are read (to reach the
// checksum) up to a bound, past which the file is refused.
func TestTrailingGzipData(t *testing.T) {
	raw := append(bytes.Clone(readFixture(t, "dt_int16.nii")), make([]byte, 100)...)
	var zbuf bytes.Buffer
	zw := gzip.NewWriter(&zbuf)
	zw.Write(raw)
	zw.Close()
	for _, c := range []struct {
		limit int64
		ok    bool
	}{{100, true}, {99, false}} {
		r, err := NewReader(bytes.NewReader(zbuf.Bytes()), Limits{})
		if err != nil {
			t.Fatal(err)
		}
		r.maxTrailing = c.limit
		vol := make([]float32, r.Header().VolumeVoxels())
		for err == nil {
			err = r.ReadVolume(vol)
		}
		if (err == io.EOF) != c.ok {
			t.Errorf("100 trailing bytes, bound %d: %v", c.limit, err)
		}
	}
}

// A *bytes.Reader that has already been read from is sniffed at its current
// position, not at its start.
func TestSniffAtPosition(t *testing.T) {
	for _, name := range []string{"gz_int16.nii.gz", "dt_int16.nii"} {
		data := append([]byte{0x1f, 0x8b, 0, 0, 0}, readFixture(t, name)...)
		br := bytes.NewReader(data)
		br.Read(make([]byte, 5))
		r, err := NewReader(br, Limits{})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(readAll(t, r)) != 72 {
			t.Fatalf("%s: wrong size", name)
		}
	}
}

// TestFiniteValues: integer data scaled within the float32 range can never
// decode to NaN or ±Inf; floating-point data can (IEEE 754, common practice).
func TestFiniteValues(t *testing.T) {
	for _, tc := range []struct {
		dt           Datatype
		slope, inter float64
		want         bool
	}{
		{Int16, 0, 0, true},     // unscaled
		{Uint8, 2, -5, true},    // scaled, small
		{Int16, 1e30, 0, true},  // 32768e30 = 3.3e34 < 1.7e38
		{Int16, 1e35, 0, false}, // 3.3e39 overflows float32
		{Uint64, 1, 0, true},    // 1.8e19
		{Float32, 0, 0, false},
		{Float64, 1, 0, false},
	} {
		h := &Header{Datatype: tc.dt, SclSlope: tc.slope, SclInter: tc.inter}
		if got := h.FiniteValues(); got != tc.want {
			t.Errorf("%s slope %g inter %g: FiniteValues %v, want %v", tc.dt, tc.slope, tc.inter, got, tc.want)
		}
	}
}

// ReadVolumeRaw + DecodeVolume give the volumes ReadVolume gives (the same
// decoder, split so that reading and decoding can run in two goroutines), and
// the same end of stream; checked on the gzip and the scaled fixtures
// (testdata/nifti/README.md: made by an independent Python writer).
func TestRawReadThenDecode(t *testing.T) {
	for _, name := range []string{"gz_int16.nii.gz", "scaled_int16.nii", "be_float32.nii"} {
		open := func() *Reader {
			r, err := NewReader(bytes.NewReader(readFixture(t, name)), Limits{})
			if err != nil {
				t.Fatal(err)
			}
			return r
		}
		a, b := open(), open()
		n := a.Header().NumVolumes()
		nv := len(a.buf) / a.Header().Datatype.Size()
		raw := make([]byte, b.VolumeBytes())
		for v := 0; v <= n; v++ {
			want, got := make([]float32, nv), make([]float32, nv)
			errA := a.ReadVolume(want)
			errB := b.ReadVolumeRaw(raw)
			if (errA == nil) != (errB == nil) || (errA != nil && errA.Error() != errB.Error()) {
				t.Fatalf("%s volume %d: ReadVolume error %v, ReadVolumeRaw error %v", name, v+1, errA, errB)
			}
			if errA != nil {
				if v != n || errA != io.EOF {
					t.Fatalf("%s: stream ended at volume %d of %d with %v; want io.EOF after the last", name, v+1, n, errA)
				}
				break
			}
			b.DecodeVolume(got, raw)
			for i := range want {
				if math.Float32bits(want[i]) != math.Float32bits(got[i]) {
					t.Fatalf("%s volume %d value %d: %v split, %v whole", name, v+1, i, got[i], want[i])
				}
			}
		}
	}
}
