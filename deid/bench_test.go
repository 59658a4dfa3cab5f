package deid

import (
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// benchFile writes 64 MiB of pseudo-random bytes (standing in for
// compressed samples) once per benchmark.
func benchFile(b *testing.B) string {
	b.Helper()
	path := filepath.Join(b.TempDir(), "noise.bin")
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	r := rand.New(rand.NewPCG(1, 2))
	buf := make([]byte, 1<<20)
	for i := 0; i < 64; i++ {
		for j := range buf {
			buf[j] = byte(r.Uint32())
		}
		f.Write(buf)
	}
	f.Close()
	return path
}

func benchNeedles() []string {
	n := []string{"Ottilie Quarnstrom", "Ottilie", "Quarnstrom", "QX-0417", "QX-0417_v2", "ottilie.q@mail.example.org",
		"+44 20 7946 0958", "442079460958", "Pell Anwick", "Brindlemoor clinic, room 4"}
	n = append(n, DateSpellings("2026-03-14")...)
	n = append(n, DateSpellings("1961-07-02")...)
	return n
}

// BenchmarkScanBytes: the leak scan of 64 MiB with about 66 values, each in
// three encodings.
func BenchmarkScanBytes(b *testing.B) {
	path := benchFile(b)
	needles := benchNeedles()
	b.SetBytes(64 << 20)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := ScanBytes(path, needles); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkReadBaseline reads the same file in the same blocks, for the
// ratio scan time / read time.
func BenchmarkReadBaseline(b *testing.B) {
	path := benchFile(b)
	b.SetBytes(64 << 20)
	buf := make([]byte, scanBlock)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f, _ := os.Open(path)
		for {
			if _, err := io.ReadFull(f, buf); err != nil {
				break
			}
		}
		f.Close()
	}
}

// BenchmarkScrubText: one paragraph of notes with every kind of identifier.
func BenchmarkScrubText(b *testing.B) {
	text := "Ottilie Quarnstrom (QX-0417) called +44 20 7946 0958 on 14 March 2026 from 192.168.4.21; see https://files.example.net/x, write o.q@mail.example.org; amplifier SN-AX44719."
	own := []string{"Ottilie Quarnstrom", "QX-0417"}
	for i := 0; i < b.N; i++ {
		ScrubText(text, own)
	}
}
