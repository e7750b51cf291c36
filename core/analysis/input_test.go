package analysis

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"io"
	"math/rand/v2"
	"testing"
	"testing/iotest"
)

// The run's SHA-256 is the same whether it is hashed in the reading goroutine
// or in a goroutine of its own (crypto/sha256 of the whole content is the
// reference), for reads of odd sizes across the chunk boundaries.
func TestAsyncHashMatchesSHA256(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	data := make([]byte, 3*asyncChunk+12345)
	for i := range data {
		data[i] = byte(rng.Uint32())
	}
	want := sha256.Sum256(data)
	for _, async := range []bool{false, true} {
		hr := newHashingReader(iotest.HalfReader(bytes.NewReader(data)))
		if async {
			hr.hashAsync()
		}
		buf := make([]byte, 7777)
		for {
			_, err := hr.Read(buf)
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
		}
		ref := hr.ref("bold", "bold.nii.gz")
		if ref.SHA256 != hex.EncodeToString(want[:]) || ref.Bytes != int64(len(data)) {
			t.Errorf("async %v: %d bytes, sha256 %s; want %d, %x", async, ref.Bytes, ref.SHA256, len(data), want)
		}
		hr.abort() // after ref: nothing to do
	}
}

// An error path stops the hashing goroutine while a reader may still be
// reading: neither side blocks or panics, and later reads go unhashed.
func TestAsyncHashAbort(t *testing.T) {
	data := make([]byte, 20*asyncChunk)
	hr := newHashingReader(bytes.NewReader(data))
	hr.hashAsync()
	done := make(chan struct{})
	go func() {
		defer close(done)
		io.Copy(io.Discard, hr)
	}()
	hr.abort()
	<-done
	hr.abort() // twice is fine
}
