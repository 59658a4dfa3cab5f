package archive

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"muarc/recfile"
	"muarc/synth"
)

// BenchmarkIndexCatalogue10k times `muarc index` with filters on a study
// of 10,000 recordings that has a catalogue: IndexStudy (the folder
// listing, a stat of every recording against its catalogue entry, the
// catalogue read) and the filter, per run. The study is four generated
// recordings (synth.TestConfig with four subjects) hard-linked under
// 10,000 distinct paths; its catalogue is made from the four files' entries
// under each path and stamp (reading 10,000 files to build it would take
// most of the run; every run still checks every entry against its file).
// MUARC_BENCH_RECORDINGS changes the count. Reported: ms per filtered
// index (the issue asks for under 1 s) and the rows it selects. Run with
//
//	go test ./archive -run XXX -bench IndexCatalogue -benchtime 5x
func BenchmarkIndexCatalogue10k(b *testing.B) {
	n := 10000
	if v, err := strconv.Atoi(os.Getenv("MUARC_BENCH_RECORDINGS")); err == nil && v > 0 {
		n = v
	}
	cfg := synth.TestConfig()
	cfg.Subjects = 4
	gen, err := synth.Generate(cfg)
	if err != nil {
		b.Fatal(err)
	}
	root := b.TempDir()
	src := filepath.Join(root, "distinct")
	for i, g := range gen {
		p := filepath.Join(src, fmt.Sprintf("rec%d.h5", i))
		os.MkdirAll(src, 0o755)
		if err := recfile.Write(p, g.Recording, recfile.WriteOptions{}); err != nil {
			b.Fatal(err)
		}
	}
	if _, _, err := IndexStudy(src, StudyOptions{Catalogue: CatalogueCreate}); err != nil {
		b.Fatal(err)
	}
	distinct, _, err := readCatalogue(filepath.Join(src, CatalogueName))
	if err != nil {
		b.Fatal(err)
	}
	study := filepath.Join(root, "study")
	entries := make([]*catalogueEntry, 0, n)
	for i := 0; i < n; i++ {
		name := fmt.Sprintf("rec%d.h5", i%len(gen))
		rel := fmt.Sprintf("sub-%03d/ses-%02d/%s", i/100, i%100/len(gen), fmt.Sprintf("r%05d-%s", i, name))
		dst := filepath.Join(study, filepath.FromSlash(rel))
		os.MkdirAll(filepath.Dir(dst), 0o755)
		if err := os.Link(filepath.Join(src, name), dst); err != nil {
			b.Fatal(err)
		}
		e := *distinct[name]
		e.Path = rel
		entries = append(entries, &e)
	}
	// Stamps after the last link (a link changes the change time of
	// every name of the file).
	for _, e := range entries {
		if e.fileStamp, err = stampOf(filepath.Join(study, filepath.FromSlash(e.Path))); err != nil {
			b.Fatal(err)
		}
	}
	if err := writeCatalogue(filepath.Join(study, CatalogueName), entries); err != nil {
		b.Fatal(err)
	}
	subject := gen[1].Recording.Subject.ID
	opt := IndexOptions{Subject: subject, Level: math.NaN()}
	b.ResetTimer()
	var rows int
	var worst time.Duration
	for i := 0; i < b.N; i++ {
		t0 := time.Now()
		sums, info, err := IndexStudy(study, StudyOptions{Catalogue: CatalogueUse, Isolated: true})
		if err != nil {
			b.Fatal(err)
		}
		if info.Reused != n || info.Read != 0 || info.Written {
			b.Fatalf("catalogue not used as it stands: %+v", info)
		}
		rows = 0
		for _, s := range opt.Filter(sums) {
			rows += len(s.Rows)
		}
		worst = max(worst, time.Since(t0))
	}
	b.ReportMetric(float64(worst.Milliseconds()), "worst_ms")
	b.ReportMetric(float64(n), "recordings")
	b.ReportMetric(float64(rows), "rows_selected")
	if rows == 0 {
		b.Fatalf("subject %s selected no rows", subject)
	}
}
