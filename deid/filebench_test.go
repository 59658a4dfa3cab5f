package deid

import (
	"os"
	"path/filepath"
	"testing"
)

// BenchmarkDeidentifyLarge de-identifies one large recording made by
// scripts/benchwrite (MUARC_BENCH_FILE; skipped when unset): the whole
// per-file path, source check and leak scan included, for profiles
// (go test -run X -bench DeidentifyLarge -cpuprofile cpu.out ./deid).
func BenchmarkDeidentifyLarge(b *testing.B) {
	in := os.Getenv("MUARC_BENCH_FILE")
	if in == "" {
		b.Skip("MUARC_BENCH_FILE not set (bin/muarc-benchwrite -seconds 300 -o FILE)")
	}
	key, err := KeyFromBytes(make([]byte, 32))
	if err != nil {
		b.Fatal(err)
	}
	dir := b.TempDir()
	fi, err := os.Stat(in)
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(fi.Size())
	for i := 0; i < b.N; i++ {
		out := filepath.Join(dir, "out.h5")
		rep, err := DeidentifyFile(in, out, StudyOptions{Key: key, Overwrite: true})
		if err != nil {
			b.Fatal(err)
		}
		if rep.Failed > 0 {
			b.Fatal(rep.Files[0].Error)
		}
	}
}
