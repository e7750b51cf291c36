package nifti

import (
	"encoding/binary"
	"fmt"
	"strings"
)

// Info is a header summary for display and for JSON (the keys of the
// command line's `info --json`).
type Info struct {
	Version   int           `json:"version"`    // 1 or 2
	Dims      []int         `json:"dims"`       // dim[1..dim[0]]
	VoxelMM   [3]float64    `json:"voxel_mm"`   // Grid().VoxelMM
	TRSec     *float64      `json:"tr_s"`       // seconds; nil (JSON null) for 3D or no time unit
	Datatype  string        `json:"datatype"`   // standard name, e.g. "int16"
	ByteOrder string        `json:"byte_order"` // "little" or "big"
	SclSlope  float64       `json:"scl_slope"`  // as applied: 1 when the data is not scaled
	SclInter  float64       `json:"scl_inter"`  // as applied: 0 when the data is not scaled
	QformCode int           `json:"qform_code"`
	SformCode int           `json:"sform_code"`
	Affine    [4][4]float64 `json:"affine"`     // rows, voxel to world mm
	DataBytes int64         `json:"data_bytes"` // decompressed image data
}

// Describe summarises a validated header. Scaling is reported as applied
// (Header.Scaling), so the JSON never holds NaN.
func Describe(h *Header) Info {
	in := Info{
		Version:   h.Version,
		Dims:      h.Dims(),
		VoxelMM:   h.Grid().VoxelMM,
		Datatype:  h.Datatype.String(),
		ByteOrder: "little",
		QformCode: h.QformCode,
		SformCode: h.SformCode,
		Affine:    h.Affine(),
		DataBytes: h.DataBytes(),
	}
	if h.ByteOrder == binary.BigEndian {
		in.ByteOrder = "big"
	}
	if tr, ok := h.TR(); ok {
		in.TRSec = &tr
	}
	in.SclSlope, in.SclInter = h.Scaling()
	return in
}

// Text returns the summary as aligned lines for a terminal.
func (in Info) Text() string {
	var sb strings.Builder
	row := func(name, format string, args ...any) {
		fmt.Fprintf(&sb, "%-12s %s\n", name, fmt.Sprintf(format, args...))
	}
	dims := make([]string, len(in.Dims))
	for i, d := range in.Dims {
		dims[i] = fmt.Sprint(d)
	}
	row("format", "NIfTI-%d, %s-endian", in.Version, in.ByteOrder)
	row("dims", "%s", strings.Join(dims, " x "))
	row("datatype", "%s", in.Datatype)
	row("voxel (mm)", "%s x %s x %s", fmtFloat(in.VoxelMM[0]), fmtFloat(in.VoxelMM[1]), fmtFloat(in.VoxelMM[2]))
	if in.TRSec != nil {
		row("TR (s)", "%s", fmtFloat(*in.TRSec))
	} else {
		row("TR (s)", "none")
	}
	if in.SclSlope == 1 && in.SclInter == 0 {
		row("scaling", "none")
	} else {
		row("scaling", "value = %s * stored + %s", fmtFloat(in.SclSlope), fmtFloat(in.SclInter))
	}
	row("transform", "qform_code %d, sform_code %d", in.QformCode, in.SformCode)
	for r, a := range in.Affine {
		name := ""
		if r == 0 {
			name = "affine (mm)"
		}
		row(name, "[%10.4f %10.4f %10.4f %10.4f ]", a[0], a[1], a[2], a[3])
	}
	row("data", "%d bytes", in.DataBytes)
	return sb.String()
}
