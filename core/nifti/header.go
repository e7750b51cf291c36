package nifti

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"math/bits"
	"strconv"
)

// Header sizes and the first data offsets of single files.
const (
	sizeNIfTI1 = 348
	sizeNIfTI2 = 540
	minVox1    = 352 // 348 header bytes + 4 extension bytes
	minVox2    = 544
)

// Header holds the decoded NIfTI-1 or NIfTI-2 header. Fields keep the
// stored values (units as in XYZTUnits); Affine, Grid and TR convert to mm
// and seconds.
type Header struct {
	Version   int              // 1 or 2
	ByteOrder binary.ByteOrder // as stored: binary.LittleEndian or binary.BigEndian
	Dim       [8]int64         // Dim[0] = number of dimensions; Dim[1..3] = nx, ny, nz; Dim[4] = volumes
	Pixdim    [8]float64       // Pixdim[0] = qfac; [1..3] voxel size; [4] = TR (units in XYZTUnits)
	Datatype  Datatype
	Bitpix    int
	VoxOffset int64 // byte offset of the image data (in the .img file for pairs)

	SclSlope, SclInter float64 // stored scaling; see Scaling

	XYZTUnits uint8 // space units in bits 0-2, time units in bits 3-5

	QformCode, SformCode                                       int
	QuaternB, QuaternC, QuaternD, QOffsetX, QOffsetY, QOffsetZ float64
	Srow                                                       [3][4]float64 // srow_x, srow_y, srow_z

	IntentCode int
	IntentP    [3]float64
	IntentName string
	Descrip    string

	Pair bool // magic "ni1"/"ni2": the data is in a separate .img file
}

// ReadHeader reads and validates exactly one NIfTI-1 (348 bytes) or NIfTI-2
// (540 bytes) header from r. The version and byte order come from
// sizeof_hdr read both ways. It does no gzip sniffing and reads nothing past
// the header. A header cut short gives an error wrapping
// io.ErrUnexpectedEOF.
func ReadHeader(r io.Reader) (*Header, error) {
	var buf [sizeNIfTI2]byte
	if _, err := io.ReadFull(r, buf[:4]); err != nil {
		return nil, headerErr(err)
	}
	var order binary.ByteOrder
	var size int
	le, be := int32(binary.LittleEndian.Uint32(buf[:4])), int32(binary.BigEndian.Uint32(buf[:4]))
	switch {
	case le == sizeNIfTI1:
		order, size = binary.LittleEndian, sizeNIfTI1
	case be == sizeNIfTI1:
		order, size = binary.BigEndian, sizeNIfTI1
	case le == sizeNIfTI2:
		order, size = binary.LittleEndian, sizeNIfTI2
	case be == sizeNIfTI2:
		order, size = binary.BigEndian, sizeNIfTI2
	default:
		return nil, &FieldError{Field: "sizeof_hdr", Got: strconv.Itoa(int(le)),
			Want: "348 (NIfTI-1) or 540 (NIfTI-2) in either byte order; is this a NIfTI file?"}
	}
	if _, err := io.ReadFull(r, buf[4:size]); err != nil {
		return nil, headerErr(err)
	}
	var h *Header
	var err error
	if size == sizeNIfTI1 {
		h, err = decode1(buf[:size], order)
	} else {
		h, err = decode2(buf[:size], order)
	}
	if err != nil {
		return nil, err
	}
	if err := h.validate(); err != nil {
		return nil, err
	}
	return h, nil
}

func headerErr(err error) error {
	if err == io.EOF {
		err = io.ErrUnexpectedEOF
	}
	return fmt.Errorf("nifti: reading header: %w", err)
}

// cstring returns b up to its first NUL.
func cstring(b []byte) string {
	if i := bytes.IndexByte(b, 0); i >= 0 {
		b = b[:i]
	}
	return string(b)
}

func decode1(b []byte, o binary.ByteOrder) (*Header, error) {
	f32 := func(off int) float64 { return float64(math.Float32frombits(o.Uint32(b[off:]))) }
	i16 := func(off int) int { return int(int16(o.Uint16(b[off:]))) }
	h := &Header{Version: 1, ByteOrder: o}
	switch m := string(b[344:348]); m {
	case "n+1\x00":
	case "ni1\x00":
		h.Pair = true
	default:
		return nil, &FieldError{Field: "magic", Got: strconv.Quote(m), Want: `"n+1\x00" or "ni1\x00"`}
	}
	for k := range h.Dim {
		h.Dim[k] = int64(i16(40 + 2*k))
		h.Pixdim[k] = f32(76 + 4*k)
	}
	for k := range h.IntentP {
		h.IntentP[k] = f32(56 + 4*k)
	}
	h.IntentCode = i16(68)
	h.Datatype = Datatype(i16(70))
	h.Bitpix = i16(72)
	vo := f32(108)
	if math.IsNaN(vo) || vo < 0 || vo > 1<<40 {
		return nil, fieldErr("vox_offset", "a byte offset from 0 to 2^40", vo)
	}
	h.VoxOffset = int64(math.Round(vo))
	h.SclSlope, h.SclInter = f32(112), f32(116)
	h.XYZTUnits = b[123]
	h.Descrip = cstring(b[148:228])
	h.QformCode, h.SformCode = i16(252), i16(254)
	h.QuaternB, h.QuaternC, h.QuaternD = f32(256), f32(260), f32(264)
	h.QOffsetX, h.QOffsetY, h.QOffsetZ = f32(268), f32(272), f32(276)
	for r := range 3 {
		for c := range 4 {
			h.Srow[r][c] = f32(280 + 16*r + 4*c)
		}
	}
	h.IntentName = cstring(b[328:344])
	return h, nil
}

func decode2(b []byte, o binary.ByteOrder) (*Header, error) {
	f64 := func(off int) float64 { return math.Float64frombits(o.Uint64(b[off:])) }
	i64 := func(off int) int64 { return int64(o.Uint64(b[off:])) }
	i32 := func(off int) int { return int(int32(o.Uint32(b[off:]))) }
	h := &Header{Version: 2, ByteOrder: o}
	switch m := string(b[4:12]); m {
	case "n+2\x00\r\n\x1a\n":
	case "ni2\x00\r\n\x1a\n":
		h.Pair = true
	default:
		want := `"n+2\x00\r\n\x1a\n" or "ni2\x00\r\n\x1a\n"`
		if m[:4] == "n+2\x00" || m[:4] == "ni2\x00" {
			want += " (the last four bytes differ: was the file converted as text?)"
		}
		return nil, &FieldError{Field: "magic", Got: strconv.Quote(m), Want: want}
	}
	h.Datatype = Datatype(int16(o.Uint16(b[12:])))
	h.Bitpix = int(int16(o.Uint16(b[14:])))
	for k := range h.Dim {
		h.Dim[k] = i64(16 + 8*k)
		h.Pixdim[k] = f64(104 + 8*k)
	}
	for k := range h.IntentP {
		h.IntentP[k] = f64(80 + 8*k)
	}
	h.VoxOffset = i64(168)
	h.SclSlope, h.SclInter = f64(176), f64(184)
	h.Descrip = cstring(b[240:320])
	h.QformCode, h.SformCode = i32(344), i32(348)
	h.QuaternB, h.QuaternC, h.QuaternD = f64(352), f64(360), f64(368)
	h.QOffsetX, h.QOffsetY, h.QOffsetZ = f64(376), f64(384), f64(392)
	for r := range 3 {
		for c := range 4 {
			h.Srow[r][c] = f64(400 + 32*r + 8*c)
		}
	}
	h.XYZTUnits = uint8(i32(500))
	h.IntentCode = i32(504)
	h.IntentName = cstring(b[508:524])
	return h, nil
}

func fmtFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func itoa(v int64) string { return strconv.FormatInt(v, 10) }

// validate checks the fields the reader relies on, in the order a reader
// meets them.
func (h *Header) validate() error {
	if h.Dim[0] < 1 || h.Dim[0] > 7 {
		return &FieldError{Field: "dim[0]", Got: itoa(h.Dim[0]), Want: "1 to 7"}
	}
	for k := 1; k <= int(h.Dim[0]); k++ {
		if h.Dim[k] < 1 {
			return &FieldError{Field: fmt.Sprintf("dim[%d]", k), Got: itoa(h.Dim[k]), Want: "at least 1"}
		}
	}
	if !known(h.Datatype) {
		return &FieldError{Field: "datatype", Got: strconv.Itoa(int(h.Datatype)), Want: "a NIfTI datatype code"}
	}
	if !h.Datatype.Supported() {
		return &UnsupportedError{Datatype: h.Datatype}
	}
	if want := 8 * h.Datatype.Size(); h.Bitpix != want {
		return &FieldError{Field: "bitpix", Got: strconv.Itoa(h.Bitpix),
			Want: fmt.Sprintf("%d for datatype %d (%s)", want, int(h.Datatype), h.Datatype)}
	}
	if _, ok := h.dataBytes(); !ok {
		return &FieldError{Field: "dim", Got: fmt.Sprint(h.Dims()),
			Want: "dimensions whose data size fits in 63 bits"}
	}
	minVox := int64(0)
	if !h.Pair {
		minVox = minVox1
		if h.Version == 2 {
			minVox = minVox2
		}
	}
	if h.VoxOffset < minVox {
		return &FieldError{Field: "vox_offset", Got: itoa(h.VoxOffset),
			Want: fmt.Sprintf("at least %d in a single-file NIfTI-%d", minVox, h.Version)}
	}
	last := max(3, int(h.Dim[0]))
	for k := 0; k <= last; k++ {
		if v := h.Pixdim[k]; math.IsNaN(v) || math.IsInf(v, 0) {
			return &FieldError{Field: fmt.Sprintf("pixdim[%d]", k), Got: fmtFloat(v), Want: "a finite number"}
		}
	}
	if h.QformCode > 0 {
		for i, v := range [...]float64{h.QuaternB, h.QuaternC, h.QuaternD, h.QOffsetX, h.QOffsetY, h.QOffsetZ} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				name := [...]string{"quatern_b", "quatern_c", "quatern_d", "qoffset_x", "qoffset_y", "qoffset_z"}[i]
				return &FieldError{Field: name, Got: fmtFloat(v), Want: "a finite number when qform_code > 0"}
			}
		}
	}
	if h.SformCode > 0 {
		for r := range 3 {
			for c := range 4 {
				if v := h.Srow[r][c]; math.IsNaN(v) || math.IsInf(v, 0) {
					return &FieldError{Field: fmt.Sprintf("srow_%c[%d]", "xyz"[r], c), Got: fmtFloat(v),
						Want: "a finite number when sform_code > 0"}
				}
			}
		}
	}
	// Unit conversion can overflow a finite field (NIfTI-2 float64 metres).
	g := h.Grid()
	for r := range 3 {
		for c := range 4 {
			if v := g.Affine[r][c]; math.IsNaN(v) || math.IsInf(v, 0) {
				return &FieldError{Field: "affine", Got: fmt.Sprintf("row %d column %d %s mm", r, c, fmtFloat(v)),
					Want: "finite values after conversion to mm"}
			}
		}
	}
	for k, v := range g.VoxelMM {
		if math.IsInf(v, 0) {
			return &FieldError{Field: fmt.Sprintf("pixdim[%d]", k+1), Got: fmtFloat(h.Pixdim[k+1]),
				Want: "a voxel size that is finite in mm"}
		}
	}
	return nil
}

// Dims returns dim[1..dim[0]].
func (h *Header) Dims() []int {
	n := min(max(int(h.Dim[0]), 0), 7)
	d := make([]int, n)
	for k := range d {
		d[k] = int(h.Dim[k+1])
	}
	return d
}

// dim returns dim[k], or 1 when k is past dim[0].
func (h *Header) dim(k int) int64 {
	if int64(k) > h.Dim[0] {
		return 1
	}
	return h.Dim[k]
}

// NumVolumes returns the product of dim[4..dim[0]], at least 1.
func (h *Header) NumVolumes() int {
	n := int64(1)
	for k := 4; k <= 7; k++ {
		n *= h.dim(k)
	}
	return int(max(n, 1))
}

// VolumeVoxels returns nx*ny*nz.
func (h *Header) VolumeVoxels() int {
	return int(h.dim(1) * h.dim(2) * h.dim(3))
}

// DataBytes returns the decompressed size of the image data in bytes:
// all dims times the datatype size. It saturates at math.MaxInt64 if the
// product overflows (ReadHeader refuses such headers).
func (h *Header) DataBytes() int64 {
	n, ok := h.dataBytes()
	if !ok {
		return math.MaxInt64
	}
	return n
}

func (h *Header) dataBytes() (int64, bool) {
	n := uint64(max(h.Datatype.Size(), 1))
	for k := 1; k <= 7; k++ {
		d := h.dim(k)
		if d < 1 {
			return 0, false
		}
		hi, lo := bits.Mul64(n, uint64(d))
		if hi != 0 || lo > math.MaxInt64 {
			return 0, false
		}
		n = lo
	}
	return int64(n), true
}

// Scaling returns scl_slope and scl_inter, or 1 and 0 when the data is not
// scaled (scl_slope 0 or not finite). A non-finite scl_inter counts as 0.
func (h *Header) Scaling() (slope, inter float64) {
	s, t := h.SclSlope, h.SclInter
	if s == 0 || math.IsNaN(s) || math.IsInf(s, 0) {
		return 1, 0
	}
	if math.IsNaN(t) || math.IsInf(t, 0) {
		t = 0
	}
	return s, t
}

// FiniteValues reports whether every value the data can hold decodes to a
// finite float32: true for integer datatypes whose largest magnitude, scaled,
// stays below the float32 range; false for floating-point data (which may hold
// NaN or ±Inf). A reader of an always-finite run can skip checking values.
func (h *Header) FiniteValues() bool {
	var big float64
	switch h.Datatype {
	case Uint8:
		big = math.MaxUint8
	case Int8:
		big = -math.MinInt8
	case Int16:
		big = -math.MinInt16
	case Uint16:
		big = math.MaxUint16
	case Int32:
		big = -math.MinInt32
	case Uint32:
		big = math.MaxUint32
	case Int64:
		big = -math.MinInt64
	case Uint64:
		big = math.MaxUint64
	default:
		return false
	}
	slope, inter := h.Scaling()
	return big*math.Abs(slope)+math.Abs(inter) < math.MaxFloat32/2
}

// spaceScale returns the factor from the header's space unit to mm
// (unit 0, unknown, is taken as mm).
func spaceScale(units uint8) float64 {
	switch units & 0x07 {
	case 1: // metre
		return 1000
	case 3: // micron
		return 1e-3
	}
	return 1
}

// timeScale returns the factor from the header's time unit to seconds, and
// false for Hz, ppm and rad/s, which are not times. Unit 0 is taken as
// seconds.
func timeScale(units uint8) (float64, bool) {
	switch units & 0x38 {
	case 0, 8: // unknown, second
		return 1, true
	case 16: // millisecond
		return 1e-3, true
	case 24: // microsecond
		return 1e-6, true
	}
	return 0, false
}

// TR returns pixdim[4] in seconds. ok is false for images with fewer than
// four dims, a time unit that is not a time (Hz, ppm, rad/s), or a
// pixdim[4] that is not positive. A time unit of 0 is taken as seconds
// (Warnings says so).
func (h *Header) TR() (sec float64, ok bool) {
	if h.Dim[0] < 4 {
		return 0, false
	}
	s, ok := timeScale(h.XYZTUnits)
	if !ok || !(h.Pixdim[4] > 0) || math.IsInf(h.Pixdim[4], 0) {
		return 0, false
	}
	return h.Pixdim[4] * s, true
}

// Warnings lists assumptions the reader made about this header: a missing
// space or time unit.
func (h *Header) Warnings() []string {
	var w []string
	if h.XYZTUnits&0x07 == 0 {
		w = append(w, "nifti: xyzt_units has no space unit; voxel sizes taken as mm")
	}
	if h.Dim[0] >= 4 && h.XYZTUnits&0x38 == 0 && h.Pixdim[4] > 0 {
		w = append(w, "nifti: xyzt_units has no time unit; pixdim[4] = "+fmtFloat(h.Pixdim[4])+" taken as seconds")
	}
	return w
}
