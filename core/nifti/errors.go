package nifti

import (
	"fmt"
	"strings"
)

// FieldError reports a header field whose value is out of range, for example
// "nifti: dim[0] = 9, want 1 to 7".
type FieldError struct {
	Field string // header field name as in the NIfTI headers, e.g. "dim[0]", "vox_offset"
	Got   string // the value found
	Want  string // what a valid file has
}

func (e *FieldError) Error() string {
	return "nifti: " + e.Field + " = " + e.Got + ", want " + e.Want
}

func fieldErr(field, want string, got any) error {
	return &FieldError{Field: field, Got: fmt.Sprint(got), Want: want}
}

// UnsupportedError reports a valid NIfTI datatype that this package does not
// decode (complex, RGB, float128).
type UnsupportedError struct {
	Datatype Datatype
}

func (e *UnsupportedError) Error() string {
	names := make([]string, len(supported))
	for i, d := range supported {
		names[i] = d.String()
	}
	return fmt.Sprintf("nifti: unsupported datatype %d (%s); want an integer or float type (%s)",
		int(e.Datatype), e.Datatype, strings.Join(names, ", "))
}

// TruncatedError reports image data that ended inside a volume.
type TruncatedError struct {
	Volume  int   // 1-based volume in which the data ended
	Volumes int   // number of volumes the header promises
	Err     error // io.ErrUnexpectedEOF, or the decompressor's error
}

func (e *TruncatedError) Error() string {
	return fmt.Sprintf("nifti: volume %d of %d: %v", e.Volume, e.Volumes, e.Err)
}

func (e *TruncatedError) Unwrap() error { return e.Err }
