package analysis

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"sync"

	"winnow/core/report"
)

// Input is one file handed to the pipeline.
type Input struct {
	Name string    // file name, for messages and provenance
	R    io.Reader // the bytes (gzip or not); read once, front to back
	Size int64     // bytes; -1 if unknown
	// Provenance, when set, gives the size and SHA-256 of the file as the
	// user gave it, after R has been read to its end (it may wait for them,
	// or fail); R is then not hashed again. The page uses it when the
	// browser inflates a .nii.gz before Go sees it, so the summary still
	// describes the compressed file.
	Provenance func() (bytes int64, sha256 string, err error)
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
	prov func() (int64, string, error)

	// With hashAsync, the bytes are copied into chunks that a goroutine of
	// their own hashes, so hashing leaves the reading goroutine's path.
	chunk []byte      // filling
	full  chan []byte // to the hasher; a nil chunk ends it
	spare chan []byte // back from it
	quit  chan struct{}
	ended chan struct{}
	stop  sync.Once
}

// asyncChunk is the size of the chunks handed to the hashing goroutine.
const asyncChunk = 256 << 10

// hashAsync moves the hashing to a goroutine of its own. It must be called
// before the first Read; ref waits for the hashing to end, and abort stops it
// on an error path (while a reader may still be reading).
func (hr *hashingReader) hashAsync() {
	if hr.h == nil {
		return
	}
	const buffers = 4
	hr.full, hr.spare = make(chan []byte, buffers), make(chan []byte, buffers)
	hr.quit, hr.ended = make(chan struct{}), make(chan struct{})
	for range buffers {
		hr.spare <- make([]byte, 0, asyncChunk)
	}
	hr.chunk = <-hr.spare
	go func() {
		defer close(hr.ended)
		for {
			select {
			case b := <-hr.full:
				if b == nil {
					return
				}
				hr.h.Write(b)
				hr.spare <- b[:0] // never blocks: spare holds every buffer
			case <-hr.quit:
				return
			}
		}
	}()
}

// wait hands the last chunk to the hashing goroutine and waits until it has
// hashed everything. Without hashAsync it does nothing.
func (hr *hashingReader) wait() {
	if hr.full == nil {
		return
	}
	hr.stop.Do(func() {
		if len(hr.chunk) > 0 {
			hr.full <- hr.chunk
		}
		hr.full <- nil
		<-hr.ended
	})
}

// abort stops the hashing goroutine without waiting for the reader; later
// reads are not hashed. Without hashAsync, or after wait, it does nothing.
func (hr *hashingReader) abort() {
	if hr.full == nil {
		return
	}
	hr.stop.Do(func() { close(hr.quit) })
}

// write hashes b, at once or through the hashing goroutine.
func (hr *hashingReader) write(b []byte) {
	if hr.full == nil {
		hr.h.Write(b)
		return
	}
	for len(b) > 0 {
		k := min(len(b), cap(hr.chunk)-len(hr.chunk))
		hr.chunk = append(hr.chunk, b[:k]...)
		b = b[k:]
		if len(hr.chunk) < cap(hr.chunk) {
			continue
		}
		select {
		case hr.full <- hr.chunk:
		case <-hr.quit:
			return
		}
		select {
		case hr.chunk = <-hr.spare:
		case <-hr.quit:
			return
		}
	}
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
			hr.write(p[:n])
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
	r, err := hr.refErr(role, name)
	if err != nil {
		panic("analysis: ref of an input whose provenance can fail; use refErr")
	}
	return r
}

// refErr is ref for an input that may bring its own provenance, which can
// fail (the page's reader worker could not read the file again).
func (hr *hashingReader) refErr(role, name string) (report.InputRef, error) {
	if hr.prov != nil {
		n, sum, err := hr.prov()
		if err != nil {
			return report.InputRef{}, err
		}
		return report.InputRef{Role: role, Name: name, Bytes: n, SHA256: sum}, nil
	}
	hr.wait()
	return report.InputRef{Role: role, Name: name, Bytes: hr.n, SHA256: hex.EncodeToString(hr.h.Sum(nil))}, nil
}
