package main

import (
	"encoding/json"
	"os"
	"path/filepath"

	"muarc/archive"
	"muarc/internal/atomicfile"
	"muarc/internal/batch"
)

// shardFile is one input's outcome in a batch command's shard report.
type shardFile struct {
	// Path is the input (file or recording folder), relative to source
	// when it lies below it.
	Path string
	// Err is why the input failed ("" when it went through); Refused marks
	// an input that was read but judged (validation errors).
	Err              string
	Refused          bool
	ValidationErrors int
}

// writeShardReport writes the muarc-shard-report JSON (archive.ShardReport)
// of a batch run, so that `muarc merge-reports` can combine the reports of
// a job array's shards. Sizes and times are those of the inputs.
func writeShardReport(out, command, source string, shard batch.Shard, files []shardFile) error {
	recs := make([]archive.FileRecord, 0, len(files))
	for _, f := range files {
		r := archive.FileRecord{Path: filepath.ToSlash(relTo(source, f.Path)), Status: archive.StatusOK,
			ValidationErrors: f.ValidationErrors, Message: f.Err}
		if st, err := os.Stat(f.Path); err == nil {
			r.MtimeNs = st.ModTime().UnixNano()
			if !st.IsDir() {
				r.Bytes = st.Size()
			}
		}
		switch {
		case f.Refused:
			r.Status = archive.StatusRefused
		case f.Err != "":
			r.Status = archive.StatusError
		}
		recs = append(recs, r)
	}
	rep := archive.NewShardReport(command, source, shard, recs)
	data, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteFile(out, append(data, '\n'), true)
}

func relTo(base, p string) string {
	if r, err := filepath.Rel(base, p); err == nil && r != ".." && !filepath.IsAbs(r) && (len(r) < 3 || r[:3] != "../") {
		return r
	}
	return filepath.Base(p)
}
