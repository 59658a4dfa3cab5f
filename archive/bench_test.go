package archive

import (
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"
	"time"

	"muarc/internal/batch"
	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// benchStudy writes a study of about total bytes under dir: one recording
// of 64 channels written by recfile (synth.BenchSource samples), copied
// under new names until the total is reached. Returns the file paths
// relative to dir.
func benchStudy(b *testing.B, dir string, total int64) []string {
	b.Helper()
	rec := &record.Recording{
		Study:   record.Study{ID: "BENCH", Title: "Hashing benchmark", License: "CC0-1.0"},
		Subject: record.Subject{ID: "bench", AgeYears: math.NaN(), HeightCm: math.NaN(), MassKg: math.NaN()},
		Session: record.Session{ID: "bench"},
	}
	const ch, rate, seconds = 64, 2048.0, 400.0
	chans := make([]record.Channel, ch)
	for i := range chans {
		chans[i] = record.Channel{Label: strconv.Itoa(i + 1), Row: i / 8, Column: i % 8, XMm: float64(i%8) * 8, YMm: float64(i/8) * 8, Usable: true}
	}
	rec.Trials = []record.Trial{{Name: "long", TargetPctMVC: 20, MVC: math.NaN(), Profile: record.ForceProfile{RestS: math.NaN(), RampUpS: math.NaN(), PlateauS: math.NaN(), RampDownS: math.NaN()},
		Arrays: []record.Array{{Name: "grid", Muscle: "tibialis anterior", Rows: 8, Columns: 8, IEDMm: 8, Gain: math.NaN(),
			FilterLowHz: math.NaN(), FilterHighHz: math.NaN(), SamplingRateHz: rate, Unit: "uV", Channels: chans,
			Samples: synth.BenchSource(ch, rate, seconds, 1)}}}}
	first := filepath.Join(dir, "rec000.h5")
	if err := recfile.Write(first, rec, recfile.WriteOptions{DeflateLevel: 1}); err != nil {
		b.Fatal(err)
	}
	st, _ := os.Stat(first)
	files := []string{"rec000.h5"}
	for sum := st.Size(); sum < total; sum += st.Size() {
		name := fmt.Sprintf("rec%03d.h5", len(files))
		copyPlain(b, first, filepath.Join(dir, name))
		files = append(files, name)
	}
	return files
}

func copyPlain(b *testing.B, from, to string) {
	in, err := os.Open(from)
	if err != nil {
		b.Fatal(err)
	}
	defer in.Close()
	out, err := os.Create(to)
	if err != nil {
		b.Fatal(err)
	}
	if _, err := io.Copy(out, in); err != nil {
		b.Fatal(err)
	}
	if err := out.Close(); err != nil {
		b.Fatal(err)
	}
}

// BenchmarkPackHashingVsSha256sum measures, in one run on the same files
// (page cache warm), coreutils sha256sum over the whole study against pack's
// hashing: the in-place hashing of `pack --shard` (both shards of 2, one
// after the other, all cores and one worker), and the folder pack's
// copy-and-hash into the deposit (which also writes and syncs every byte).
// Checks are given as known (as from merged shard reports) so that only
// hashing and copying are timed. The study is about 3 GB; set
// MUARC_BENCH_BYTES to change it. Reported: MB/s of each and the ratios to
// sha256sum. Run with
//
//	go test ./archive -run XXX -bench PackHashing -benchtime 1x
func BenchmarkPackHashingVsSha256sum(b *testing.B) {
	if _, err := exec.LookPath("sha256sum"); err != nil {
		b.Skip("sha256sum not found")
	}
	total := int64(3e9)
	if v, err := strconv.ParseInt(os.Getenv("MUARC_BENCH_BYTES"), 10, 64); err == nil && v > 0 {
		total = v
	}
	root, err := os.MkdirTemp("", "muarc-bench-")
	if err != nil {
		b.Fatal(err)
	}
	defer os.RemoveAll(root)
	src := filepath.Join(root, "study")
	os.MkdirAll(src, 0o755)
	files := benchStudy(b, src, total)
	var bytes int64
	var known []FileRecord
	for _, f := range files {
		st, _ := os.Stat(filepath.Join(src, f))
		bytes += st.Size()
		known = append(known, FileRecord{Path: f, Bytes: st.Size(), MtimeNs: st.ModTime().UnixNano(), Status: StatusOK})
	}
	checks := &ShardReport{Format: ReportFormat, FormatVersion: 1, Command: "pack", Files: known}
	mb := float64(bytes) / 1e6
	b.Logf("study: %d files, %.0f MB", len(files), mb)

	// sha256sum and pack's hashing run alternately, twice each; the best
	// wall-clock rate of each is kept (the machine is shared), and the rate
	// per CPU second (user + system), which other load does not skew.
	sha256sum := func() (wall, cpu float64) {
		t0 := time.Now()
		cmd := exec.Command("sha256sum", files...)
		cmd.Dir = src
		if out, err := cmd.CombinedOutput(); err != nil {
			b.Fatalf("sha256sum: %v %s", err, out)
		}
		c := cmd.ProcessState.UserTime() + cmd.ProcessState.SystemTime()
		return mb / time.Since(t0).Seconds(), mb / c.Seconds()
	}
	packHash := func(workers int) (wall, cpu float64) {
		var secs float64
		c0 := cpuTime()
		for s := 1; s <= 2; s++ {
			res, err := Pack(src, filepath.Join(root, fmt.Sprintf("shard%d.json", s)), PackOptions{
				Shard: batch.Shard{I: s, N: 2}, Known: []*ShardReport{checks}, Workers: workers, Overwrite: true})
			if err != nil {
				b.Fatal(err)
			}
			secs += res.HashSeconds
		}
		return mb / secs, mb / (cpuTime() - c0).Seconds()
	}
	best := func(a, b float64) float64 { return math.Max(a, b) }
	for i := 0; i < b.N; i++ {
		// Warm the page cache for everyone alike.
		warm := exec.Command("sh", "-c", "cat \"$@\" > /dev/null", "sh")
		warm.Dir = src
		warm.Args = append(warm.Args, files...)
		if out, err := warm.CombinedOutput(); err != nil {
			b.Fatalf("warm: %v %s", err, out)
		}
		var refWall, refCPU, allWall, allCPU, oneWall, oneCPU float64
		for round := 0; round < 2; round++ {
			w, c := sha256sum()
			refWall, refCPU = best(refWall, w), best(refCPU, c)
			w, c = packHash(0)
			allWall, allCPU = best(allWall, w), best(allCPU, c)
			w, c = packHash(1)
			oneWall, oneCPU = best(oneWall, w), best(oneCPU, c)
		}

		out := filepath.Join(root, "deposit")
		os.RemoveAll(out)
		res, err := Pack(src, out, PackOptions{Known: []*ShardReport{checks}, Licence: "CC0-1.0"})
		if err != nil {
			b.Fatal(err)
		}
		copyRate := float64(res.HashedBytes) / 1e6 / res.HashSeconds
		os.RemoveAll(out)

		b.ReportMetric(refWall, "sha256sum_MB/s")
		b.ReportMetric(refCPU, "sha256sum_MB/cpu-s")
		b.ReportMetric(allWall, "pack_hash_MB/s")
		b.ReportMetric(oneWall, "pack_hash_1worker_MB/s")
		b.ReportMetric(oneCPU, "pack_hash_MB/cpu-s")
		b.ReportMetric(copyRate, "pack_copy+hash_MB/s")
		b.ReportMetric(allWall/refWall, "hash_ratio")
		b.ReportMetric(oneWall/refWall, "hash_1worker_ratio")
		b.ReportMetric(oneCPU/refCPU, "hash_cpu_ratio")
		b.ReportMetric(copyRate/refWall, "copy+hash_ratio")
	}
}

// cpuTime is this process's user + system CPU time so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
