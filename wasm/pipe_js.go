//go:build js && wasm

package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"sync"
	"syscall/js"
)

// The parallel read of a gzip run. A second worker (the reader) slices the
// Blob and inflates it with the browser's DecompressionStream, and posts
// the decompressed bytes in pipeChunk-sized ArrayBuffers (transferred) over
// a MessagePort straight to the fit worker, whose Input.Bold reads them as
// an uncompressed stream. Decoding and accumulating in the fit worker thus
// overlap inflating in the reader, as the native pipeline's read-ahead
// goroutine overlaps them on two cores. The reader then reads the Blob once
// more to hash it (SHA-256, for the summary's provenance) while the fit
// worker solves the model; the fit asks for the hash only after its solve.
// The port messages are in protocol.go.

// ignore is a JS function that does nothing, for promises whose outcome
// does not matter. It is never released.
var ignore = js.FuncOf(func(js.Value, []js.Value) any { return nil })

// errPipeClosed ends the reader's job when the fit worker stops reading.
var errPipeClosed = errors.New("the fit stopped reading")

// inflateToPort inflates a gzip Blob and posts the decompressed bytes on
// port, at most pipeWindow chunks ahead of the fit worker's credits, then
// hashes the Blob and posts its size and SHA-256, which it also returns.
func inflateToPort(ctx context.Context, blob, port js.Value) (n int64, sum string, err error) {
	credits := make(chan struct{}, 4*pipeWindow)
	closed := make(chan struct{})
	var once sync.Once
	onMsg := js.FuncOf(func(_ js.Value, args []js.Value) any {
		d := args[0].Get("data")
		switch {
		case d.Type() != js.TypeObject:
		case d.Get("credit").Truthy():
			select {
			case credits <- struct{}{}:
			default:
			}
		case d.Get("close").Truthy():
			once.Do(func() { close(closed) })
		}
		return nil
	})
	port.Set("onmessage", onMsg) // starts the port
	defer func() {
		if err != nil && !errors.Is(err, errPipeClosed) {
			port.Call("postMessage", map[string]any{"error": err.Error()})
		}
		port.Set("onmessage", js.Null())
		port.Call("close")
		onMsg.Release()
	}()
	frs := js.Global().Get("FileReaderSync").New()
	size := int64(blob.Get("size").Float())
	if err := inflatePosting(ctx, frs, blob, size, port, credits, closed); err != nil {
		return 0, "", err
	}
	port.Call("postMessage", map[string]any{"end": true})

	// The hash, while the fit worker solves.
	h := sha256.New()
	buf := make([]byte, chunkBytes)
	for off := int64(0); off < size; {
		select {
		case <-ctx.Done():
			return 0, "", ctx.Err()
		case <-closed:
			return 0, "", errPipeClosed
		default:
		}
		chunk, err := sliceBlob(frs, blob, off, min(off+chunkBytes, size))
		if err != nil {
			return 0, "", err
		}
		k := chunk.Length()
		if k == 0 {
			return 0, "", fmt.Errorf("reading bytes %d of %d: the file ended early", off, size)
		}
		js.CopyBytesToGo(buf[:k], chunk)
		h.Write(buf[:k])
		off += int64(k)
	}
	sum = hex.EncodeToString(h.Sum(nil))
	port.Call("postMessage", map[string]any{"bytes": float64(size), "sha256": sum})
	return size, sum, nil
}

// inflatePosting writes the Blob's bytes into a DecompressionStream and
// posts what comes out, in chunks of pipeChunk bytes, on port. One read and
// at most one write of the stream are outstanding at a time.
func inflatePosting(ctx context.Context, frs, blob js.Value, size int64, port js.Value, credits, closed <-chan struct{}) error {
	ds := js.Global().Get("DecompressionStream").New("gzip")
	writer := ds.Get("writable").Call("getWriter")
	reader := ds.Get("readable").Call("getReader")
	u8 := js.Global().Get("Uint8Array")
	out, fill, inflight := u8.New(pipeChunk), 0, 0

	// flush posts the filled part of out once a credit allows it.
	flush := func() error {
		if fill == 0 {
			return nil
		}
		for inflight >= pipeWindow {
			select {
			case <-credits:
				inflight--
			case <-closed:
				return errPipeClosed
			case <-ctx.Done():
				return ctx.Err()
			}
		}
		msg := out
		if fill < pipeChunk {
			msg = out.Call("slice", 0, fill)
		}
		port.Call("postMessage", map[string]any{"chunk": msg}, []any{msg.Get("buffer")})
		inflight++
		out, fill = u8.New(pipeChunk), 0
		return nil
	}

	var rd, wr *promise
	defer func() {
		if rd == nil && wr == nil {
			return
		}
		// Settle what is outstanding (after an error or a cancel), and
		// release each callback only once its promise has settled: JS
		// must never call a released function.
		reader.Call("cancel").Call("catch", ignore)
		writer.Call("abort").Call("catch", ignore)
		for _, p := range []*promise{rd, wr} {
			if p != nil {
				go func() {
					<-p.ch
					p.release()
				}()
			}
		}
	}()
	var off int64
	srcDone, closedIn := false, false
	for {
		if rd == nil {
			rd = startPromise(reader.Call("read"))
		}
		if wr == nil && !closedIn {
			if srcDone {
				wr = startPromise(writer.Call("close"))
				closedIn = true
			} else {
				chunk, err := sliceBlob(frs, blob, off, min(off+chunkBytes, size))
				if err != nil {
					return err
				}
				k := chunk.Length()
				if k == 0 {
					return fmt.Errorf("reading bytes %d of %d: the file ended early", off, size)
				}
				off += int64(k)
				srcDone = off >= size
				wr = startPromise(writer.Call("write", chunk))
			}
		}
		var wrc chan outcome // nil (never ready) with no write outstanding
		if wr != nil {
			wrc = wr.ch
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-closed:
			return errPipeClosed
		case o := <-wrc:
			wr.release()
			wr = nil
			if o.err != nil {
				return fmt.Errorf("gzip: %v", o.err)
			}
		case o := <-rd.ch:
			rd.release()
			rd = nil
			if o.err != nil {
				return fmt.Errorf("gzip: %v", o.err)
			}
			if o.v.Get("done").Truthy() {
				return flush()
			}
			v := o.v.Get("value")
			vn, vo := v.Length(), 0
			for vo < vn {
				k := min(vn-vo, pipeChunk-fill)
				part := v
				if vo > 0 || k < vn {
					part = v.Call("subarray", vo, vo+k)
				}
				out.Call("set", part, fill)
				fill += k
				vo += k
				if fill == pipeChunk {
					if err := flush(); err != nil {
						return err
					}
				}
			}
		}
	}
}

// sliceBlob reads bytes [from, to) of a Blob with FileReaderSync. A JS
// exception (the file changed or vanished since it was picked) becomes an
// error.
func sliceBlob(frs, blob js.Value, from, to int64) (u js.Value, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("reading bytes %d to %d: %v", from, to, r)
		}
	}()
	ab := frs.Call("readAsArrayBuffer", blob.Call("slice", float64(from), float64(to)))
	return js.Global().Get("Uint8Array").New(ab), nil
}

// portReader is the fit worker's end of the pipe: an io.Reader over the
// decompressed chunks arriving on a MessagePort. Each chunk taken is
// answered with a credit, so the reader worker stays at most pipeWindow
// chunks ahead. Read (and Ref) block their goroutine until a message
// arrives; the Go scheduler returns to the worker's event loop when nothing
// else is runnable, which delivers the port's messages.
type portReader struct {
	port js.Value
	fn   js.Func

	mu   sync.Mutex
	q    []js.Value
	wake chan struct{}

	buf      []byte // the current chunk, when it did not fit the caller's buffer
	pos      int
	end      bool  // all bytes read
	err      error // sticky
	hashed   bool
	n        int64
	sum      string
	released bool
}

func newPortReader(port js.Value) *portReader {
	r := &portReader{port: port, wake: make(chan struct{}, 1)}
	r.fn = js.FuncOf(func(_ js.Value, args []js.Value) any {
		r.mu.Lock()
		r.q = append(r.q, args[0].Get("data"))
		r.mu.Unlock()
		select {
		case r.wake <- struct{}{}:
		default:
		}
		return nil
	})
	port.Set("onmessage", r.fn) // starts the port
	return r
}

// next waits for the next port message and applies it; a chunk is returned.
func (r *portReader) next() (chunk js.Value) {
	var m js.Value
	for {
		r.mu.Lock()
		if len(r.q) > 0 {
			m = r.q[0]
			r.q[0] = js.Undefined()
			r.q = r.q[1:]
			r.mu.Unlock()
			break
		}
		r.mu.Unlock()
		<-r.wake
	}
	switch {
	case m.Type() != js.TypeObject:
		r.err = fmt.Errorf("reader worker: a %s on the pipe, want a message object", m.Type())
	case m.Get("chunk").InstanceOf(js.Global().Get("Uint8Array")):
		r.port.Call("postMessage", map[string]any{"credit": true})
		return m.Get("chunk")
	case m.Get("end").Truthy():
		r.end = true
	case m.Get("sha256").Type() == js.TypeString:
		r.hashed = true
		r.n = int64(m.Get("bytes").Float())
		r.sum = m.Get("sha256").String()
	case m.Get("error").Type() == js.TypeString:
		r.err = errors.New(m.Get("error").String())
	default:
		r.err = errors.New("reader worker: an unknown message on the pipe")
	}
	return js.Undefined()
}

func (r *portReader) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	for r.pos >= len(r.buf) {
		if r.err != nil {
			return 0, r.err
		}
		if r.end {
			return 0, io.EOF
		}
		c := r.next()
		if c.IsUndefined() {
			continue
		}
		k := c.Length()
		if k <= len(p) {
			js.CopyBytesToGo(p[:k], c)
			return k, nil
		}
		if cap(r.buf) < k {
			r.buf = make([]byte, k)
		}
		r.buf = r.buf[:k]
		js.CopyBytesToGo(r.buf, c)
		r.pos = 0
	}
	k := copy(p, r.buf[r.pos:])
	r.pos += k
	return k, nil
}

// Ref waits for the compressed file's size and SHA-256 from the reader
// worker, which hashes the file after the last chunk.
func (r *portReader) Ref() (int64, string, error) {
	for !r.hashed && r.err == nil {
		if c := r.next(); !c.IsUndefined() {
			r.err = errors.New("reader worker: bytes after the end of the run")
		}
	}
	if r.err != nil {
		return 0, "", r.err
	}
	return r.n, r.sum, nil
}

// Close tells the reader worker that nothing more is wanted (its job ends
// if it is still running) and releases the port.
func (r *portReader) Close() {
	if r.released {
		return
	}
	r.released = true
	if !r.hashed && r.err == nil {
		r.port.Call("postMessage", map[string]any{"close": true})
	}
	r.port.Set("onmessage", js.Null())
	r.port.Call("close")
	r.fn.Release()
}
