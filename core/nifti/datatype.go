package nifti

import (
	"encoding/binary"
	"math"
)

// Datatype is a NIfTI datatype code (the datatype field of the header).
type Datatype int16

// NIfTI datatype codes, as published in nifti1.h.
const (
	Uint8      Datatype = 2
	Int16      Datatype = 4
	Int32      Datatype = 8
	Float32    Datatype = 16
	Complex64  Datatype = 32
	Float64    Datatype = 64
	RGB24      Datatype = 128
	Int8       Datatype = 256
	Uint16     Datatype = 512
	Uint32     Datatype = 768
	Int64      Datatype = 1024
	Uint64     Datatype = 1280
	Float128   Datatype = 1536
	Complex128 Datatype = 1792
	Complex256 Datatype = 2048
	RGBA32     Datatype = 2304
)

// supported lists the datatypes this package decodes, in the order error
// messages name them.
var supported = [...]Datatype{Uint8, Int8, Int16, Uint16, Int32, Uint32, Int64, Uint64, Float32, Float64}

type dtInfo struct {
	name string
	size int // bytes per value
}

var datatypes = map[Datatype]dtInfo{
	Uint8:      {"uint8", 1},
	Int16:      {"int16", 2},
	Int32:      {"int32", 4},
	Float32:    {"float32", 4},
	Complex64:  {"complex64", 8},
	Float64:    {"float64", 8},
	RGB24:      {"rgb24", 3},
	Int8:       {"int8", 1},
	Uint16:     {"uint16", 2},
	Uint32:     {"uint32", 4},
	Int64:      {"int64", 8},
	Uint64:     {"uint64", 8},
	Float128:   {"float128", 16},
	Complex128: {"complex128", 16},
	Complex256: {"complex256", 32},
	RGBA32:     {"rgba32", 4},
}

// String returns the standard lower-case name ("int16", "float32",
// "complex64", ...), or "datatype N" for an unknown code.
func (d Datatype) String() string {
	if in, ok := datatypes[d]; ok {
		return in.name
	}
	return "datatype " + itoa(int64(d))
}

// Size returns the number of bytes per value, or 0 for an unknown code.
func (d Datatype) Size() int { return datatypes[d].size }

// Supported reports whether the package decodes d.
func (d Datatype) Supported() bool {
	for _, s := range supported {
		if s == d {
			return true
		}
	}
	return false
}

func known(d Datatype) bool { _, ok := datatypes[d]; return ok }

// decode converts the stored values in b (len(dst)*dt.Size() bytes, byte
// order big or little) to float32 in dst, applying v*slope + inter when
// scaled. Each case is one long loop over the volume, written so that the
// compiler drops the bounds checks (the len(b) test is the only branch).
//
// Types that float32 holds exactly (8- and 16-bit integers, float32) are
// converted first and scaled in a second pass in float64; wider types are
// scaled in float64 before the single rounding to float32.
func decode(dst []float32, b []byte, dt Datatype, big bool, slope, inter float64, scaled bool) {
	if len(b) < len(dst)*dt.Size() {
		panic("nifti: decode: short buffer")
	}
	switch dt {
	case Uint8:
		b = b[:len(dst)]
		for i, v := range b {
			dst[i] = float32(v)
		}
	case Int8:
		b = b[:len(dst)]
		for i, v := range b {
			dst[i] = float32(int8(v))
		}
	case Int16:
		decodeInt16(dst, b, big)
	case Uint16:
		if big {
			for i := range dst {
				if len(b) < 2 {
					break
				}
				dst[i] = float32(binary.BigEndian.Uint16(b))
				b = b[2:]
			}
		} else {
			for i := range dst {
				if len(b) < 2 {
					break
				}
				dst[i] = float32(binary.LittleEndian.Uint16(b))
				b = b[2:]
			}
		}
	case Float32:
		if big {
			for i := range dst {
				if len(b) < 4 {
					break
				}
				dst[i] = math.Float32frombits(binary.BigEndian.Uint32(b))
				b = b[4:]
			}
		} else {
			for i := range dst {
				if len(b) < 4 {
					break
				}
				dst[i] = math.Float32frombits(binary.LittleEndian.Uint32(b))
				b = b[4:]
			}
		}
	default:
		if !scaled {
			slope, inter = 1, 0
		}
		decodeWide(dst, b, dt, big, slope, inter)
		return
	}
	if scaled {
		for i, v := range dst {
			dst[i] = float32(float64(v)*slope + inter)
		}
	}
}

// decodeWide handles the 32- and 64-bit types, scaling in float64.
func decodeWide(dst []float32, b []byte, dt Datatype, big bool, slope, inter float64) {
	switch dt {
	case Int32:
		if big {
			for i := range dst {
				if len(b) < 4 {
					break
				}
				dst[i] = float32(float64(int32(binary.BigEndian.Uint32(b)))*slope + inter)
				b = b[4:]
			}
		} else {
			for i := range dst {
				if len(b) < 4 {
					break
				}
				dst[i] = float32(float64(int32(binary.LittleEndian.Uint32(b)))*slope + inter)
				b = b[4:]
			}
		}
	case Uint32:
		if big {
			for i := range dst {
				if len(b) < 4 {
					break
				}
				dst[i] = float32(float64(binary.BigEndian.Uint32(b))*slope + inter)
				b = b[4:]
			}
		} else {
			for i := range dst {
				if len(b) < 4 {
					break
				}
				dst[i] = float32(float64(binary.LittleEndian.Uint32(b))*slope + inter)
				b = b[4:]
			}
		}
	case Int64:
		if big {
			for i := range dst {
				if len(b) < 8 {
					break
				}
				dst[i] = float32(float64(int64(binary.BigEndian.Uint64(b)))*slope + inter)
				b = b[8:]
			}
		} else {
			for i := range dst {
				if len(b) < 8 {
					break
				}
				dst[i] = float32(float64(int64(binary.LittleEndian.Uint64(b)))*slope + inter)
				b = b[8:]
			}
		}
	case Uint64:
		if big {
			for i := range dst {
				if len(b) < 8 {
					break
				}
				dst[i] = float32(float64(binary.BigEndian.Uint64(b))*slope + inter)
				b = b[8:]
			}
		} else {
			for i := range dst {
				if len(b) < 8 {
					break
				}
				dst[i] = float32(float64(binary.LittleEndian.Uint64(b))*slope + inter)
				b = b[8:]
			}
		}
	case Float64:
		if big {
			for i := range dst {
				if len(b) < 8 {
					break
				}
				dst[i] = float32(math.Float64frombits(binary.BigEndian.Uint64(b))*slope + inter)
				b = b[8:]
			}
		} else {
			for i := range dst {
				if len(b) < 8 {
					break
				}
				dst[i] = float32(math.Float64frombits(binary.LittleEndian.Uint64(b))*slope + inter)
				b = b[8:]
			}
		}
	default:
		panic("nifti: decode: datatype " + dt.String() + " not supported")
	}
}

// decodeInt16 is the common BOLD case, unrolled: one 8-byte load gives four
// values.
func decodeInt16(dst []float32, b []byte, big bool) {
	n := min(len(dst), len(b)/2) &^ 3
	d := dst[:n]
	if big {
		for len(d) >= 4 && len(b) >= 8 {
			u := binary.BigEndian.Uint64(b)
			d[0] = float32(int16(u >> 48))
			d[1] = float32(int16(u >> 32))
			d[2] = float32(int16(u >> 16))
			d[3] = float32(int16(u))
			d, b = d[4:], b[8:]
		}
		for i := n; i < len(dst) && len(b) >= 2; i++ {
			dst[i] = float32(int16(binary.BigEndian.Uint16(b)))
			b = b[2:]
		}
		return
	}
	for len(d) >= 4 && len(b) >= 8 {
		u := binary.LittleEndian.Uint64(b)
		d[0] = float32(int16(u))
		d[1] = float32(int16(u >> 16))
		d[2] = float32(int16(u >> 32))
		d[3] = float32(int16(u >> 48))
		d, b = d[4:], b[8:]
	}
	for i := n; i < len(dst) && len(b) >= 2; i++ {
		dst[i] = float32(int16(binary.LittleEndian.Uint16(b)))
		b = b[2:]
	}
}
