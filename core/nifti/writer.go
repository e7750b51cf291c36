package nifti

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/klauspost/compress/gzip"
)

// WriteOptions sets the datatype and intent of written images. The zero
// value writes float32 with no intent.
type WriteOptions struct {
	Datatype   Datatype   // 0: Float32; also Int16 and Uint8
	IntentCode int        // 3 t (IntentP[0] = df), 4 F (IntentP[0], IntentP[1] = df1, df2), 5 z; 0 none
	IntentP    [3]float64 // intent_p1..3
	IntentName string     // up to 15 bytes
	Descrip    string     // up to 79 bytes
	// SclSlope and SclInter apply to Int16 and Uint8 output: stored =
	// round((v - SclInter) / SclSlope), clamped to the type's range. A zero
	// SclSlope means slope 1 and inter 0, so values are stored as given
	// (rounded to nearest, clamped). Float32 output always has slope 1,
	// inter 0.
	SclSlope, SclInter float64
	// Uncompressed writes a plain .nii stream instead of gzip (for data
	// that stays in memory, where compressing costs time and saves nothing).
	Uncompressed bool
}

// Writer writes a gzip-compressed NIfTI-1 image volume by volume. It holds
// one volume's bytes at a time.
type Writer struct {
	gz      io.WriteCloser // the gzip stream, or the plain writer with a no-op Close
	dt      Datatype
	slope   float64
	inter   float64
	buf     []byte
	vvox    int
	nvols   int
	written int
	err     error
	closed  bool
}

// WriteMap writes a 3D image as gzip-compressed NIfTI-1 (.nii.gz),
// little-endian, vox_offset 352. data has g.Voxels() values in index order
// i + nx*(j + ny*k); it panics otherwise.
func WriteMap(w io.Writer, g Grid, data []float32, opt WriteOptions) error {
	nw, err := newWriter(w, g, 1, 0, opt, 3)
	if err != nil {
		return err
	}
	if err := nw.WriteVolume(data); err != nil {
		return err
	}
	return nw.Close()
}

// NewWriter starts a 4D gzip-compressed NIfTI-1 image of nvols volumes with
// repetition time trSec (seconds, stored in pixdim[4] with xyzt_units
// mm and s). It writes the header at once; call WriteVolume nvols times, then
// Close, which does not close w.
//
// Geometry: the Grid's sform and qform are copied, codes included. A Grid
// with qform_code 0 gets a qform derived from its affine (qform_code =
// sform_code) when the affine has no shear; with shear qform_code stays 0.
// A Grid with both codes 0 whose affine is not diag(VoxelMM) is written
// with that affine as an sform with sform_code 2 (and the derived qform),
// so no geometry is lost.
func NewWriter(w io.Writer, g Grid, nvols int, trSec float64, opt WriteOptions) (*Writer, error) {
	return newWriter(w, g, nvols, trSec, opt, 4)
}

func newWriter(w io.Writer, g Grid, nvols int, trSec float64, opt WriteOptions, ndim int) (*Writer, error) {
	if opt.Datatype == 0 {
		opt.Datatype = Float32
	}
	switch opt.Datatype {
	case Float32, Int16, Uint8:
	default:
		return nil, fmt.Errorf("nifti: cannot write datatype %d (%s); want float32, int16 or uint8", int(opt.Datatype), opt.Datatype)
	}
	for k, n := range g.Dims {
		if n < 1 || n > math.MaxInt16 {
			return nil, fmt.Errorf("nifti: grid dim %d is %d; want 1 to %d for a NIfTI-1 file", k+1, n, math.MaxInt16)
		}
	}
	if nvols < 1 || nvols > math.MaxInt16 {
		return nil, fmt.Errorf("nifti: %d volumes; want 1 to %d for a NIfTI-1 file", nvols, math.MaxInt16)
	}
	if ndim == 4 && !(trSec >= 0) || math.IsInf(trSec, 0) {
		return nil, fmt.Errorf("nifti: TR %v s; want a finite number >= 0", trSec)
	}
	slope, inter := 1.0, 0.0
	if opt.Datatype != Float32 && opt.SclSlope != 0 {
		if math.IsNaN(opt.SclSlope) || math.IsInf(opt.SclSlope, 0) || math.IsNaN(opt.SclInter) || math.IsInf(opt.SclInter, 0) {
			return nil, fmt.Errorf("nifti: scl_slope %v, scl_inter %v; want finite numbers", opt.SclSlope, opt.SclInter)
		}
		slope, inter = opt.SclSlope, opt.SclInter
	}
	geo, err := writeGeometry(g)
	if err != nil {
		return nil, err
	}
	hdr := encodeHeader1(g.Dims, ndim, nvols, trSec, geo, opt, slope, inter)
	var gz io.WriteCloser = nopCloser{w}
	if !opt.Uncompressed {
		// 4D runs are large: the fastest level costs a few percent of size
		// and saves most of the time; 3D maps take the default level.
		level := gzip.DefaultCompression
		if ndim == 4 {
			level = gzip.BestSpeed
		}
		z, err := gzip.NewWriterLevel(w, level)
		if err != nil {
			return nil, fmt.Errorf("nifti: %w", err)
		}
		gz = z
	}
	if _, err := gz.Write(hdr); err != nil {
		return nil, fmt.Errorf("nifti: writing header: %w", err)
	}
	vvox := g.Voxels()
	return &Writer{
		gz:    gz,
		dt:    opt.Datatype,
		slope: float64(float32(slope)),
		inter: float64(float32(inter)),
		buf:   make([]byte, vvox*opt.Datatype.Size()),
		vvox:  vvox,
		nvols: nvols,
	}, nil
}

// nopCloser lets a plain writer stand where the gzip stream would.
type nopCloser struct{ io.Writer }

func (nopCloser) Close() error { return nil }

// WriteVolume encodes and writes the next volume (g.Voxels() values; it
// panics otherwise). Writing more than nvols volumes is an error.
func (w *Writer) WriteVolume(v []float32) error {
	if len(v) != w.vvox {
		panic(fmt.Sprintf("nifti: WriteVolume: %d values, want %d", len(v), w.vvox))
	}
	if w.err != nil {
		return w.err
	}
	if w.closed || w.written == w.nvols {
		w.err = fmt.Errorf("nifti: WriteVolume: all %d volumes already written", w.nvols)
		return w.err
	}
	encode(w.buf, v, w.dt, w.slope, w.inter)
	if _, err := w.gz.Write(w.buf); err != nil {
		w.err = fmt.Errorf("nifti: writing volume %d of %d: %w", w.written+1, w.nvols, err)
		return w.err
	}
	w.written++
	return nil
}

// Close flushes the gzip stream. It reports an error if fewer volumes than
// promised were written (the file would be truncated).
func (w *Writer) Close() error {
	if w.closed {
		return w.err
	}
	w.closed = true
	err := w.gz.Close()
	if w.err != nil {
		return w.err
	}
	if err != nil {
		w.err = fmt.Errorf("nifti: closing gzip stream: %w", err)
		return w.err
	}
	if w.written != w.nvols {
		w.err = fmt.Errorf("nifti: Close after %d of %d volumes", w.written, w.nvols)
	}
	return w.err
}

// encode converts v to little-endian stored values in b (loops written so
// the compiler drops the bounds checks).
func encode(b []byte, v []float32, dt Datatype, slope, inter float64) {
	if len(b) < len(v)*dt.Size() {
		panic("nifti: encode: short buffer")
	}
	switch dt {
	case Float32:
		for _, x := range v {
			if len(b) < 4 {
				break
			}
			binary.LittleEndian.PutUint32(b, math.Float32bits(x))
			b = b[4:]
		}
	case Int16:
		for _, x := range v {
			if len(b) < 2 {
				break
			}
			binary.LittleEndian.PutUint16(b, uint16(int16(quantize(x, slope, inter, math.MinInt16, math.MaxInt16))))
			b = b[2:]
		}
	case Uint8:
		b = b[:len(v)]
		for i, x := range v {
			b[i] = uint8(quantize(x, slope, inter, 0, math.MaxUint8))
		}
	default:
		panic("nifti: encode: datatype " + dt.String())
	}
}

// quantize returns round((x - inter) / slope) clamped to [lo, hi]; NaN
// becomes 0.
func quantize(x float32, slope, inter, lo, hi float64) float64 {
	q := math.Round((float64(x) - inter) / slope)
	switch {
	case q != q:
		return 0
	case q < lo:
		return lo
	case q > hi:
		return hi
	}
	return q
}

type geometry struct {
	qcode, scode     int
	b, c, d          float64
	qx, qy, qz, qfac float64
	pix              [3]float64
	srow             [3][4]float64
}

var errGeometry = errors.New("nifti: grid affine is not finite")

func writeGeometry(g Grid) (geometry, error) {
	var geo geometry
	A := g.Affine
	zero := true
	for r := range 4 {
		for c := range 4 {
			if v := A[r][c]; math.IsNaN(v) || math.IsInf(v, 0) {
				return geo, errGeometry
			} else if v != 0 {
				zero = false
			}
		}
	}
	geo.pix = g.VoxelMM
	for k := range geo.pix {
		if geo.pix[k] <= 0 || math.IsNaN(geo.pix[k]) || math.IsInf(geo.pix[k], 0) {
			geo.pix[k] = 1
		}
	}
	if zero {
		A = [4][4]float64{{geo.pix[0], 0, 0, 0}, {0, geo.pix[1], 0, 0}, {0, 0, geo.pix[2], 0}, {0, 0, 0, 1}}
	}
	A[3] = [4]float64{0, 0, 0, 1}
	rows := [3][4]float64{A[0], A[1], A[2]}
	switch {
	case g.SformCode > 0:
		geo.scode = g.SformCode
		geo.srow = g.Srow
		if g.Srow == ([3][4]float64{}) {
			geo.srow = rows
		}
	case g.QformCode > 0:
		// copy: no sform
	default:
		diag := [3][4]float64{{geo.pix[0], 0, 0, 0}, {0, geo.pix[1], 0, 0}, {0, 0, geo.pix[2], 0}}
		if !closeRows(rows, diag) {
			geo.scode = 2 // "aligned": the grid's own world space
			geo.srow = rows
		}
	}
	if g.QformCode > 0 {
		geo.qcode = g.QformCode
		geo.b, geo.c, geo.d = g.QuaternB, g.QuaternC, g.QuaternD
		geo.qx, geo.qy, geo.qz = g.QOffsetX, g.QOffsetY, g.QOffsetZ
		geo.qfac = qfac(g.Qfac)
		return geo, nil
	}
	geo.qfac = 1
	if geo.scode == 0 {
		return geo, nil // diag(pixdim): no transform codes needed
	}
	var src [4][4]float64
	for r := range 3 {
		src[r] = geo.srow[r]
	}
	if b, c, d, qf, pix, ok := quaternFromAffine(src); ok {
		geo.qcode = geo.scode
		geo.b, geo.c, geo.d, geo.qfac, geo.pix = b, c, d, qf, pix
		geo.qx, geo.qy, geo.qz = src[0][3], src[1][3], src[2][3]
	}
	return geo, nil
}

func closeRows(a, b [3][4]float64) bool {
	for r := range 3 {
		for c := range 4 {
			if math.Abs(a[r][c]-b[r][c]) > 1e-9*(1+math.Abs(b[r][c])) {
				return false
			}
		}
	}
	return true
}

// encodeHeader1 returns the 348-byte NIfTI-1 header plus 4 zero extension
// bytes, little-endian (layout: nifti1.h; offsets as in the methods notes).
func encodeHeader1(dims [3]int, ndim, nvols int, trSec float64, geo geometry, opt WriteOptions, slope, inter float64) []byte {
	b := make([]byte, minVox1)
	le := binary.LittleEndian
	i16 := func(off, v int) { le.PutUint16(b[off:], uint16(int16(v))) }
	f32 := func(off int, v float64) { le.PutUint32(b[off:], math.Float32bits(float32(v))) }
	le.PutUint32(b[0:], sizeNIfTI1)
	dim := [8]int{ndim, dims[0], dims[1], dims[2], 1, 1, 1, 1}
	pix := [8]float64{geo.qfac, geo.pix[0], geo.pix[1], geo.pix[2], 0, 0, 0, 0}
	if ndim == 4 {
		dim[4] = nvols
		pix[4] = trSec
	}
	for k := range 8 {
		i16(40+2*k, dim[k])
		f32(76+4*k, pix[k])
	}
	for k := range 3 {
		f32(56+4*k, opt.IntentP[k])
	}
	i16(68, opt.IntentCode)
	i16(70, int(opt.Datatype))
	i16(72, 8*opt.Datatype.Size())
	f32(108, minVox1)
	f32(112, slope)
	f32(116, inter)
	b[123] = 2 | 8 // mm, s
	copy(b[148:227], opt.Descrip)
	i16(252, geo.qcode)
	i16(254, geo.scode)
	for k, v := range [6]float64{geo.b, geo.c, geo.d, geo.qx, geo.qy, geo.qz} {
		f32(256+4*k, v)
	}
	for r := range 3 {
		for c := range 4 {
			f32(280+16*r+4*c, geo.srow[r][c])
		}
	}
	copy(b[328:343], opt.IntentName)
	copy(b[344:348], "n+1\x00")
	return b
}
