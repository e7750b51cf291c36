//go:build js && wasm

package main

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"syscall/js"
	"time"

	"github.com/klauspost/compress/gzip"
)

// blobReader reads a JS Blob (a File is one) front to back: each refill
// slices at most chunkBytes off the Blob and reads them with the worker-only
// FileReaderSync, then copies them into Go memory in one call. Only one
// chunk is ever held in JS memory.
type blobReader struct {
	blob      js.Value
	frs       js.Value
	size, off int64
	buf       []byte
	pos       int
}

func newBlobReader(blob js.Value) *blobReader {
	return &blobReader{
		blob: blob,
		frs:  js.Global().Get("FileReaderSync").New(),
		size: int64(blob.Get("size").Float()),
	}
}

func (b *blobReader) Read(p []byte) (n int, err error) {
	if len(p) == 0 {
		return 0, nil
	}
	if b.pos >= len(b.buf) {
		if b.off >= b.size {
			return 0, io.EOF
		}
		if err := b.fill(); err != nil {
			return 0, err
		}
	}
	n = copy(p, b.buf[b.pos:])
	b.pos += n
	return n, nil
}

// fill reads the next chunk. A JS exception (the file changed or vanished
// since it was picked) becomes an error instead of a panic.
func (b *blobReader) fill() (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("reading bytes %d to %d of %d: %v", b.off, min(b.off+chunkBytes, b.size), b.size, r)
		}
	}()
	end := min(b.off+chunkBytes, b.size)
	ab := b.frs.Call("readAsArrayBuffer", b.blob.Call("slice", float64(b.off), float64(end)))
	u8 := js.Global().Get("Uint8Array").New(ab)
	n := u8.Length()
	if cap(b.buf) < n {
		b.buf = make([]byte, n)
	}
	b.buf = b.buf[:n]
	js.CopyBytesToGo(b.buf, u8)
	if n == 0 {
		return io.ErrUnexpectedEOF
	}
	b.off += int64(n)
	b.pos = 0
	return nil
}

// gunzipStream reads a gzip Blob through the browser's DecompressionStream:
// the Blob's own stream is inflated outside Go, and each decompressed chunk
// is copied into Go memory in one call. Read blocks its goroutine on the
// stream's promise; the Go scheduler returns to the worker's event loop
// meanwhile, so it must not be called from a js.FuncOf callback.
type gunzipStream struct {
	reader js.Value
	buf    []byte
	pos    int
	done   bool
}

func newGunzipStream(blob js.Value) *gunzipStream {
	ds := js.Global().Get("DecompressionStream").New("gzip")
	return &gunzipStream{reader: blob.Call("stream").Call("pipeThrough", ds).Call("getReader")}
}

func (g *gunzipStream) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	for g.pos >= len(g.buf) {
		if g.done {
			return 0, io.EOF
		}
		v, err := await(g.reader.Call("read"))
		if err != nil {
			return 0, fmt.Errorf("gzip: %v", err)
		}
		if v.Get("done").Truthy() {
			g.done = true
			continue
		}
		u8 := v.Get("value")
		n := u8.Length()
		if cap(g.buf) < n {
			g.buf = make([]byte, n)
		}
		g.buf = g.buf[:n]
		js.CopyBytesToGo(g.buf, u8)
		g.pos = 0
	}
	n := copy(p, g.buf[g.pos:])
	g.pos += n
	return n, nil
}

// await waits for a JS promise from a goroutine.
func await(p js.Value) (js.Value, error) {
	pr := startPromise(p)
	o := <-pr.ch
	pr.release()
	return o.v, o.err
}

// openBlob returns a reader of a Blob's bytes and its size in bytes.
func openBlob(blob js.Value) (io.Reader, int64) {
	br := newBlobReader(blob)
	return br, br.size
}

// gunzipTiming inflates a gzip Blob to the end and returns the decompressed
// size and the wall time in ms: how "stream" uses DecompressionStream, how
// "wasm" the Go decoder (the one package nifti uses) over FileReaderSync
// chunks. It serves the benchmark hook window.winnow.gunzipTiming.
func gunzipTiming(blob js.Value, how string) (n int64, ms float64, err error) {
	if !blob.InstanceOf(js.Global().Get("Blob")) {
		return 0, 0, errors.New("gunzip: blob is not a Blob")
	}
	t0 := time.Now()
	var r io.Reader
	switch how {
	case "stream":
		r = newGunzipStream(blob)
	case "wasm":
		zr, err := gzip.NewReader(newBlobReader(blob))
		if err != nil {
			return 0, 0, err
		}
		r = zr
	default:
		return 0, 0, fmt.Errorf("gunzip: how %q; want stream or wasm", how)
	}
	n, err = io.Copy(io.Discard, r)
	return n, float64(time.Since(t0).Microseconds()) / 1000, err
}

// promise is a JS promise being waited for from Go.
type promise struct {
	ch      chan outcome
	ok, bad js.Func
}

type outcome struct {
	v   js.Value
	err error
}

func startPromise(p js.Value) *promise {
	pr := &promise{ch: make(chan outcome, 1)}
	pr.ok = js.FuncOf(func(_ js.Value, a []js.Value) any {
		pr.ch <- outcome{v: a[0]}
		return nil
	})
	pr.bad = js.FuncOf(func(_ js.Value, a []js.Value) any {
		msg := "rejected"
		if len(a) > 0 && present(a[0]) {
			// String(reason): a reason may be any value (a stream
			// canceled without one rejects its reads with undefined).
			msg = js.Global().Call("String", a[0]).String()
		}
		pr.ch <- outcome{err: errors.New(msg)}
		return nil
	})
	p.Call("then", pr.ok, pr.bad)
	return pr
}

func (p *promise) release() {
	p.ok.Release()
	p.bad.Release()
}

// inflateTee reads a gzip Blob through the browser's DecompressionStream
// while Go still sees every compressed byte: Go slices the Blob with
// FileReaderSync, counts and hashes each chunk (SHA-256, for the summary's
// provenance, which describes the file as given), and writes it into the
// stream; Read returns the decompressed bytes. One read and at most one
// write are outstanding at a time, so the stream's backpressure cannot
// stall it.
type inflateTee struct {
	src            *blobReader
	h              hash.Hash
	n              int64
	writer, reader js.Value
	rd, wr         *promise
	srcDone        bool
	closed, done   bool
	chunk, buf     []byte
	pos            int
}

func newInflateTee(blob js.Value) *inflateTee {
	ds := js.Global().Get("DecompressionStream").New("gzip")
	return &inflateTee{
		src:    newBlobReader(blob),
		h:      sha256.New(),
		writer: ds.Get("writable").Call("getWriter"),
		reader: ds.Get("readable").Call("getReader"),
		chunk:  make([]byte, 1<<20),
	}
}

func (t *inflateTee) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	for t.pos >= len(t.buf) {
		if t.done {
			return 0, io.EOF
		}
		if t.rd == nil {
			t.rd = startPromise(t.reader.Call("read"))
		}
		if t.wr == nil && !t.closed {
			if t.srcDone {
				t.wr = startPromise(t.writer.Call("close"))
				t.closed = true
			} else {
				n, err := t.src.Read(t.chunk)
				if n > 0 {
					t.h.Write(t.chunk[:n])
					t.n += int64(n)
					u8 := js.Global().Get("Uint8Array").New(n)
					js.CopyBytesToJS(u8, t.chunk[:n])
					t.wr = startPromise(t.writer.Call("write", u8))
				}
				if err == io.EOF {
					t.srcDone = true
				} else if err != nil {
					return 0, err
				}
				if t.wr == nil {
					continue
				}
			}
		}
		var wr chan outcome
		if t.wr != nil {
			wr = t.wr.ch
		}
		select {
		case o := <-t.rd.ch:
			t.rd.release()
			t.rd = nil
			if o.err != nil {
				return 0, fmt.Errorf("gzip: %v", o.err)
			}
			if o.v.Get("done").Truthy() {
				t.done = true
				continue
			}
			u8 := o.v.Get("value")
			n := u8.Length()
			if cap(t.buf) < n {
				t.buf = make([]byte, n)
			}
			t.buf = t.buf[:n]
			js.CopyBytesToGo(t.buf, u8)
			t.pos = 0
		case o := <-wr:
			t.wr.release()
			t.wr = nil
			if o.err != nil {
				return 0, fmt.Errorf("gzip: %v", o.err)
			}
		}
	}
	n := copy(p, t.buf[t.pos:])
	t.pos += n
	return n, nil
}

// Ref is the compressed file's size and SHA-256, once Read has returned
// io.EOF.
func (t *inflateTee) Ref() (int64, string, error) {
	return t.n, hex.EncodeToString(t.h.Sum(nil)), nil
}

// isGzip reports whether the Blob starts with the gzip magic bytes 1f 8b
// (RFC 1952) and the browser has DecompressionStream.
func isGzip(blob js.Value) (ok bool) {
	defer func() {
		if recover() != nil {
			ok = false
		}
	}()
	if js.Global().Get("DecompressionStream").IsUndefined() || blob.Get("size").Float() < 18 {
		return false
	}
	ab := js.Global().Get("FileReaderSync").New().Call("readAsArrayBuffer", blob.Call("slice", 0, 2))
	u8 := js.Global().Get("Uint8Array").New(ab)
	return u8.Index(0).Int() == 0x1f && u8.Index(1).Int() == 0x8b
}
