package nifti

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"strconv"

	"github.com/klauspost/compress/gzip"
)

// DefaultMaxDataBytes is the data budget used when Limits.MaxDataBytes is 0.
const DefaultMaxDataBytes int64 = 4 << 30

// bufSize is the read buffer in front of the file or decompressor.
const bufSize = 64 << 10

// Limits bounds what a Reader accepts before it allocates.
type Limits struct {
	MaxDataBytes int64 // largest accepted Header.DataBytes; 0 means DefaultMaxDataBytes
}

func (l Limits) maxData() int64 {
	if l.MaxDataBytes <= 0 {
		return DefaultMaxDataBytes
	}
	return l.MaxDataBytes
}

func (l Limits) check(h *Header) error {
	if n, m := h.DataBytes(), l.maxData(); n > m {
		return &FieldError{Field: "data size", Got: fmt.Sprintf("%d bytes (dims %v, %s)", n, h.Dims(), h.Datatype),
			Want: fmt.Sprintf("at most %d bytes (the reader's limit)", m)}
	}
	return nil
}

// Reader streams the volumes of one NIfTI image, one at a time. It holds
// the bytes of a single volume and never the whole series.
type Reader struct {
	hdr    *Header
	src    io.Reader
	gz     *gzip.Reader // nil for uncompressed data
	buf    []byte       // one volume of stored bytes, reused
	next   int          // 0-based index of the next volume
	nvol   int
	vvox   int
	slope  float64
	inter  float64
	scaled bool
	big    bool
	err    error // sticky

	maxTrailing int64 // bound on bytes read past the data for the checksum (the const; smaller in tests)
}

// sniff puts a buffer in front of r and, if the stream starts with the gzip
// magic 1f 8b, a gzip decompressor. It never seeks.
//
// An in-memory *bytes.Reader goes to the decompressor as it is (peeked with
// ReadAt at its current position): the gzip package decodes from it faster
// than through a bufio.Reader.
func sniff(r io.Reader) (io.Reader, *gzip.Reader, error) {
	if mr, ok := r.(*bytes.Reader); ok {
		var m [2]byte
		if n, _ := mr.ReadAt(m[:], mr.Size()-int64(mr.Len())); n == 2 && m[0] == 0x1f && m[1] == 0x8b {
			return newGzip(mr)
		}
	}
	br, ok := r.(*bufio.Reader)
	if !ok || br.Size() < bufSize {
		br = bufio.NewReaderSize(r, bufSize)
	}
	if m, _ := br.Peek(2); len(m) == 2 && m[0] == 0x1f && m[1] == 0x8b {
		return newGzip(br)
	}
	return br, nil, nil
}

func newGzip(r io.Reader) (io.Reader, *gzip.Reader, error) {
	gz, err := gzip.NewReader(r)
	if err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return nil, nil, fmt.Errorf("nifti: reading gzip header: %w", err)
	}
	return gz, gz, nil
}

// NewReader reads the header of a single-file NIfTI image (.nii, or .nii.gz
// detected by the gzip magic, not by name), validates it, checks
// DataBytes against lim, and skips to vox_offset. It reads r sequentially
// and never seeks.
func NewReader(r io.Reader, lim Limits) (*Reader, error) {
	src, gz, err := sniff(r)
	if err != nil {
		return nil, err
	}
	h, err := ReadHeader(src)
	if err != nil {
		return nil, err
	}
	if h.Pair {
		return nil, &FieldError{Field: "magic", Got: strconv.Quote(pairMagic(h.Version)),
			Want: fmt.Sprintf("%q in a single file (this header belongs to a .hdr/.img pair)", singleMagic(h.Version))}
	}
	if err := lim.check(h); err != nil {
		return nil, err
	}
	hsize := int64(sizeNIfTI1)
	if h.Version == 2 {
		hsize = sizeNIfTI2
	}
	if err := skip(src, h.VoxOffset-hsize, h.VoxOffset); err != nil {
		return nil, err
	}
	return newReader(h, src, gz), nil
}

// NewPairReader reads a header/image pair: the header from hdr (.hdr, or
// gzipped) and the data from img (.img, or gzipped) starting at vox_offset.
func NewPairReader(hdr, img io.Reader, lim Limits) (*Reader, error) {
	hsrc, _, err := sniff(hdr)
	if err != nil {
		return nil, err
	}
	h, err := ReadHeader(hsrc)
	if err != nil {
		return nil, err
	}
	if !h.Pair {
		return nil, &FieldError{Field: "magic", Got: strconv.Quote(singleMagic(h.Version)),
			Want: fmt.Sprintf("%q in a .hdr file (this is a single-file header)", pairMagic(h.Version))}
	}
	if err := lim.check(h); err != nil {
		return nil, err
	}
	src, gz, err := sniff(img)
	if err != nil {
		return nil, err
	}
	if err := skip(src, h.VoxOffset, h.VoxOffset); err != nil {
		return nil, err
	}
	return newReader(h, src, gz), nil
}

func singleMagic(version int) string {
	if version == 2 {
		return "n+2"
	}
	return "n+1"
}

func pairMagic(version int) string {
	if version == 2 {
		return "ni2"
	}
	return "ni1"
}

func skip(src io.Reader, n, voxOffset int64) error {
	if n <= 0 {
		return nil
	}
	if _, err := io.CopyN(io.Discard, src, n); err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return fmt.Errorf("nifti: skipping to vox_offset %d: %w", voxOffset, err)
	}
	return nil
}

func newReader(h *Header, src io.Reader, gz *gzip.Reader) *Reader {
	r := &Reader{
		hdr:  h,
		src:  src,
		gz:   gz,
		nvol: h.NumVolumes(),
		vvox: h.VolumeVoxels(),
		big:  h.ByteOrder == binary.BigEndian,

		maxTrailing: maxTrailing,
	}
	r.slope, r.inter = h.Scaling()
	r.scaled = r.slope != 1 || r.inter != 0
	r.buf = make([]byte, r.vvox*h.Datatype.Size())
	return r
}

// Header returns the validated header.
func (r *Reader) Header() *Header { return r.hdr }

// ReadVolume decodes the next volume into dst (length VolumeVoxels, index
// i + nx*(j + ny*k)) as float32, with scl_slope and scl_inter applied.
// After the last volume it returns io.EOF; for gzip input it first reads
// the stream to its end, so a bad checksum is reported instead. Data that
// ends early gives a *TruncatedError. Errors are sticky.
//
// It panics if len(dst) is not VolumeVoxels (a caller bug).
func (r *Reader) ReadVolume(dst []float32) error {
	if len(dst) != r.vvox {
		panic(fmt.Sprintf("nifti: ReadVolume: dst has %d values, want %d", len(dst), r.vvox))
	}
	if r.err != nil {
		return r.err
	}
	if r.next == r.nvol {
		r.err = r.finish()
		return r.err
	}
	if _, err := io.ReadFull(r.src, r.buf); err != nil {
		if err == io.EOF || err == io.ErrUnexpectedEOF {
			r.err = &TruncatedError{Volume: r.next + 1, Volumes: r.nvol, Err: io.ErrUnexpectedEOF}
		} else {
			r.err = fmt.Errorf("nifti: volume %d of %d: %w", r.next+1, r.nvol, err)
		}
		return r.err
	}
	decode(dst, r.buf, r.hdr.Datatype, r.big, r.slope, r.inter, r.scaled)
	r.next++
	return nil
}

// VolumeBytes is the number of stored bytes of one volume (ReadVolumeRaw).
func (r *Reader) VolumeBytes() int { return len(r.buf) }

// ReadVolumeRaw reads the next volume's stored bytes into raw (VolumeBytes long) without
// decoding them; DecodeVolume converts them. Splitting the two lets a caller decompress in
// one goroutine and decode in another. Errors and the end of the stream are as ReadVolume's.
func (r *Reader) ReadVolumeRaw(raw []byte) error {
	if len(raw) != len(r.buf) {
		panic(fmt.Sprintf("nifti: ReadVolumeRaw: raw has %d bytes, want %d", len(raw), len(r.buf)))
	}
	if r.err != nil {
		return r.err
	}
	if r.next == r.nvol {
		r.err = r.finish()
		return r.err
	}
	if _, err := io.ReadFull(r.src, raw); err != nil {
		if err == io.EOF || err == io.ErrUnexpectedEOF {
			r.err = &TruncatedError{Volume: r.next + 1, Volumes: r.nvol, Err: io.ErrUnexpectedEOF}
		} else {
			r.err = fmt.Errorf("nifti: volume %d of %d: %w", r.next+1, r.nvol, err)
		}
		return r.err
	}
	r.next++
	return nil
}

// DecodeVolume converts one volume's stored bytes (from ReadVolumeRaw) to scaled float32
// values, as ReadVolume does. It only reads the header's settings, so it may run in another
// goroutine than the reads.
func (r *Reader) DecodeVolume(dst []float32, raw []byte) {
	if len(dst) != r.vvox || len(raw) != len(r.buf) {
		panic(fmt.Sprintf("nifti: DecodeVolume: %d values from %d bytes, want %d from %d", len(dst), len(raw), r.vvox, len(r.buf)))
	}
	decode(dst, raw, r.hdr.Datatype, r.big, r.slope, r.inter, r.scaled)
}

// finish is called after the last volume: it reads a gzip stream to its end
// so the checksum is verified, and returns io.EOF when all is well. At most maxTrailing decompressed bytes past the image data are read.
func (r *Reader) finish() error {
	if r.gz != nil {
		n, err := io.CopyN(io.Discard, r.gz, r.maxTrailing+1)
		if err != nil && err != io.EOF {
			return fmt.Errorf("nifti: after the last volume: %w", err)
		}
		if n > r.maxTrailing {
			return &FieldError{Field: "data size", Got: fmt.Sprintf("more than %d bytes after the last volume", r.maxTrailing),
				Want: fmt.Sprintf("%d bytes of image data, as dims and datatype say", r.hdr.DataBytes())}
		}
	}
	return io.EOF
}

// maxTrailing bounds the decompressed bytes read after the last volume
// to reach the gzip checksum.
const maxTrailing = 64 << 20

// ReadImage reads a small image: the header and its first volume (the
// whole image for 3D data), scaled, as float32. For a one-volume gzip file
// it also reads to the end of the stream to verify the checksum.
func ReadImage(r io.Reader, lim Limits) (*Header, []float32, error) {
	nr, err := NewReader(r, lim)
	if err != nil {
		return nil, nil, err
	}
	dst := make([]float32, nr.vvox)
	if err := nr.ReadVolume(dst); err != nil {
		return nil, nil, err
	}
	if nr.nvol == 1 {
		if err := nr.ReadVolume(dst); err != io.EOF {
			return nil, nil, err
		}
	}
	return nr.hdr, dst, nil
}
