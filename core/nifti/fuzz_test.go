package nifti

import (
	"bytes"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// seedFuzz adds every fixture in testdata/nifti (compressed files as they
// are; the header fuzzer also gets the decompressed bytes of the gzip ones).
func seedFuzz(f *testing.F, header bool) {
	entries, err := os.ReadDir(testdataDir)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range entries {
		name := e.Name()
		if name == "manifest.json" || strings.HasSuffix(name, ".md") {
			continue
		}
		b, err := os.ReadFile(filepath.Join(testdataDir, name))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
		if header && strings.HasSuffix(name, ".gz") {
			src, _, err := sniff(bytes.NewReader(b))
			if err == nil {
				raw, _ := io.ReadAll(io.LimitReader(src, 1024))
				f.Add(raw)
			}
		}
	}
}

// FuzzReadHeader: any input gives a header or an error, never a panic; a
// header that passes validation gives finite geometry (JSON-encodable Info)
// and consistent sizes.
func FuzzReadHeader(f *testing.F) {
	seedFuzz(f, true)
	f.Fuzz(func(t *testing.T, data []byte) {
		h, err := ReadHeader(bytes.NewReader(data))
		if err != nil {
			if !strings.HasPrefix(err.Error(), "nifti: ") {
				t.Fatalf("error without prefix: %v", err)
			}
			return
		}
		in := Describe(h)
		if _, err := json.Marshal(in); err != nil {
			t.Fatalf("Info does not encode: %v\n%+v", err, in)
		}
		_ = in.Text()
		g := h.Grid()
		if _, err := g.Inverse(); err != nil && err != ErrSingular {
			t.Fatal(err)
		}
		if int64(h.VolumeVoxels())*int64(h.NumVolumes())*int64(h.Datatype.Size()) != h.DataBytes() {
			t.Fatalf("VolumeVoxels %d x NumVolumes %d x %d != DataBytes %d",
				h.VolumeVoxels(), h.NumVolumes(), h.Datatype.Size(), h.DataBytes())
		}
	})
}

// FuzzNewReader: any input read to the end gives io.EOF after exactly
// NumVolumes volumes, or an error; never a panic, never more than the data
// budget allocated.
func FuzzNewReader(f *testing.F) {
	seedFuzz(f, false)
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := NewReader(bytes.NewReader(data), Limits{MaxDataBytes: 1 << 20})
		if err != nil {
			return
		}
		h := r.Header()
		vol := make([]float32, h.VolumeVoxels())
		n := 0
		for ; ; n++ {
			if err = r.ReadVolume(vol); err != nil {
				break
			}
		}
		if err == io.EOF && n != h.NumVolumes() {
			t.Fatalf("io.EOF after %d of %d volumes", n, h.NumVolumes())
		}
		if err != io.EOF && !strings.HasPrefix(err.Error(), "nifti: ") {
			t.Fatalf("error without prefix: %v", err)
		}
	})
}
