package analysis

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"

	"winnow/core/report"
)

// Input is one file handed to the pipeline.
type Input struct {
	Name string    // file name, for messages and provenance
	R    io.Reader // the bytes (gzip or not); read once, front to back
	Size int64     // bytes; -1 if unknown
	// Provenance, when set, gives the size and SHA-256 of the file as the
	// user gave it, after R has been read to its end; R is then not hashed
	// again. The page uses it when the browser inflates a .nii.gz before Go
	// sees it, so the summary still describes the compressed file.
	Provenance func() (bytes int64, sha256 string)
}

// InputError is a problem with one of the caller's files or settings. Its
// text is one line: the file (or flag), then what is wrong.
type InputError struct {
	File string // file name or flag, e.g. "events.tsv" or `--contrast "a=b"`
	Err  error
}

func (e *InputError) Error() string {
	if e.File == "" {
		return e.Err.Error()
	}
	return e.File + ": " + e.Err.Error()
}

func (e *InputError) Unwrap() error { return e.Err }

// inputErr wraps err for file, unless it already is an InputError.
func inputErr(file string, err error) error {
	var ie *InputError
	if errors.As(err, &ie) {
		return err
	}
	return &InputError{File: file, Err: err}
}

func inputErrf(file, format string, args ...any) error {
	return &InputError{File: file, Err: fmt.Errorf(format, args...)}
}

// hashingReader counts and hashes what passes through it, for provenance.
type hashingReader struct {
	r    io.Reader
	h    hash.Hash // nil when prov is set
	n    int64
	prov func() (int64, string)
}

func newHashingReader(r io.Reader) *hashingReader {
	return &hashingReader{r: r, h: sha256.New()}
}

// newInputReader hashes in's bytes unless the input brings its own provenance.
func newInputReader(in Input) *hashingReader {
	if in.Provenance != nil {
		return &hashingReader{r: in.R, prov: in.Provenance}
	}
	return newHashingReader(in.R)
}

func (hr *hashingReader) Read(p []byte) (int, error) {
	n, err := hr.r.Read(p)
	if n > 0 {
		if hr.h != nil {
			hr.h.Write(p[:n])
		}
		hr.n += int64(n)
	}
	return n, err
}

// drain reads the rest of the stream so the hash covers the whole file.
func (hr *hashingReader) drain() error {
	_, err := io.Copy(io.Discard, hr)
	return err
}

func (hr *hashingReader) ref(role, name string) report.InputRef {
	if hr.prov != nil {
		n, sum := hr.prov()
		return report.InputRef{Role: role, Name: name, Bytes: n, SHA256: sum}
	}
	return report.InputRef{Role: role, Name: name, Bytes: hr.n, SHA256: hex.EncodeToString(hr.h.Sum(nil))}
}
