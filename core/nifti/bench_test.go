package nifti

import (
	"bufio"
	"bytes"
	"io"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/klauspost/compress/gzip"
)

const (
	benchNX, benchNY, benchNZ, benchVols = 64, 64, 32, 20
)

// benchFile is a gzip NIfTI-1 int16 series like a BOLD run: a smooth
// baseline near 1000 plus noise of sd 20, written by this package's Writer.
func benchFile(b *testing.B) []byte {
	b.Helper()
	g := Grid{Dims: [3]int{benchNX, benchNY, benchNZ}, VoxelMM: [3]float64{3, 3, 3.5},
		Affine: [4][4]float64{{3, 0, 0, -96}, {0, 3, 0, -96}, {0, 0, 3.5, -56}, {0, 0, 0, 1}}}
	var buf bytes.Buffer
	w, err := NewWriter(&buf, g, benchVols, 2, WriteOptions{Datatype: Int16})
	if err != nil {
		b.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 1))
	vol := make([]float32, g.Voxels())
	for range benchVols {
		for i := range vol {
			x := i % benchNX
			y := i / benchNX % benchNY
			vol[i] = float32(1000 + 200*math.Sin(float64(x)/9)*math.Cos(float64(y)/7) + 20*rng.NormFloat64())
		}
		if err := w.WriteVolume(vol); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	return buf.Bytes()
}

// reportCPU adds the CPU time per operation (cpu-ns/op), which is steadier
// than ns/op on a shared machine; run with -cpu 1 to compare the two
// benchmarks below.
func reportCPU(b *testing.B, start time.Duration) {
	if start == 0 || b.N == 0 {
		return
	}
	b.ReportMetric(float64((cpuTime()-start).Nanoseconds())/float64(b.N), "cpu-ns/op")
}

const benchDataBytes = benchNX * benchNY * benchNZ * benchVols * 2

// BenchmarkReadVolume: gunzip, decode int16 and convert to float32, all
// volumes of the series. MB/s counts stored bytes (voxels x 2).
func BenchmarkReadVolume(b *testing.B) {
	file := benchFile(b)
	b.SetBytes(benchDataBytes)
	b.ReportAllocs()
	vol := make([]float32, benchNX*benchNY*benchNZ)
	defer reportCPU(b, cpuTime())
	for b.Loop() {
		r, err := NewReader(bytes.NewReader(file), Limits{})
		if err != nil {
			b.Fatal(err)
		}
		for {
			if err := r.ReadVolume(vol); err == io.EOF {
				break
			} else if err != nil {
				b.Fatal(err)
			}
		}
	}
}

// streamOnly hides the concrete type of a reader, as a file or a browser
// Blob reader would: NewReader then buffers it with bufio.
type streamOnly struct{ io.Reader }

// BenchmarkReadVolumeStream: as BenchmarkReadVolume through the streaming
// (bufio) path that files and Blob readers take; compare with
// BenchmarkGunzipDiscardBufio.
func BenchmarkReadVolumeStream(b *testing.B) {
	file := benchFile(b)
	b.SetBytes(benchDataBytes)
	b.ReportAllocs()
	vol := make([]float32, benchNX*benchNY*benchNZ)
	defer reportCPU(b, cpuTime())
	for b.Loop() {
		r, err := NewReader(streamOnly{bytes.NewReader(file)}, Limits{})
		if err != nil {
			b.Fatal(err)
		}
		for {
			if err := r.ReadVolume(vol); err == io.EOF {
				break
			} else if err != nil {
				b.Fatal(err)
			}
		}
	}
}

// BenchmarkGunzipDiscardBufio: gzip through a bufio.Reader into io.Discard,
// the floor for BenchmarkReadVolumeStream.
func BenchmarkGunzipDiscardBufio(b *testing.B) {
	file := benchFile(b)
	b.SetBytes(benchDataBytes)
	b.ReportAllocs()
	defer reportCPU(b, cpuTime())
	for b.Loop() {
		zr, err := gzip.NewReader(bufio.NewReaderSize(bytes.NewReader(file), bufSize))
		if err != nil {
			b.Fatal(err)
		}
		if _, err := io.Copy(io.Discard, zr); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkGunzipDiscard: the same bytes through the gzip decompressor
// alone, the floor for BenchmarkReadVolume (compare ns/op).
func BenchmarkGunzipDiscard(b *testing.B) {
	file := benchFile(b)
	b.SetBytes(benchDataBytes)
	b.ReportAllocs()
	defer reportCPU(b, cpuTime())
	for b.Loop() {
		zr, err := gzip.NewReader(bytes.NewReader(file))
		if err != nil {
			b.Fatal(err)
		}
		if _, err := io.Copy(io.Discard, zr); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecodeInt16: the conversion loop alone on one volume.
func BenchmarkDecodeInt16(b *testing.B) {
	n := benchNX * benchNY * benchNZ
	src := make([]byte, 2*n)
	for i := range src {
		src[i] = byte(i * 7)
	}
	dst := make([]float32, n)
	b.SetBytes(int64(2 * n))
	for b.Loop() {
		decode(dst, src, Int16, false, 1, 0, false)
	}
}
