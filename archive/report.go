package archive

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"sort"
	"strings"
	"time"

	"muarc/archive/bagit"
	"muarc/internal/batch"
	"muarc/schema"
)

// ReportFormat is the "format" value of every shard report.
const ReportFormat = "muarc-shard-report"

// ReportFormatVersion is the shard report format version this build writes.
const ReportFormatVersion = 1

// Status words of a FileRecord.
const (
	StatusOK      = "ok"      // checked and hashed
	StatusRefused = "refused" // fails validation or carries identifying fields
	StatusError   = "error"   // could not be read
	StatusSkipped = "skipped" // not a recording (not *.h5 / *.hdf5); left out
)

// FileRecord is what a pack run knows about one source file. It is both a
// line of the resume cache and an entry of a shard report.
type FileRecord struct {
	// Path is relative to the source folder, slash-separated.
	Path string `json:"path"`
	// Bytes and MtimeNs (modification time, nanoseconds since 1970 UTC) are
	// the file's size and time when it was hashed: the cache key with Path.
	Bytes   int64 `json:"bytes"`
	MtimeNs int64 `json:"mtime_ns"`
	// SHA256 is the lower-case hex SHA-256 of the file's bytes; SHA512 its
	// SHA-512 when the run asked for it (pack --sha512).
	SHA256 string `json:"sha256,omitempty"`
	SHA512 string `json:"sha512,omitempty"`
	Status string `json:"status"`
	// ValidationErrors counts error findings of validate.File;
	// Identifying lists identifying fields still set (deid).
	ValidationErrors int      `json:"validation_errors"`
	Identifying      []string `json:"identifying,omitempty"`
	// Message explains a refusal or error.
	Message string `json:"message,omitempty"`
	// Damage lists the integrity findings of validation ("check at path"):
	// chunk checksums, structure, metadata digest.
	Damage []string `json:"damage,omitempty"`
}

// ShardReport is the JSON document a sharded run (`muarc pack --shard i/n`)
// writes and `muarc merge-reports` combines:
//
//	{"format": "muarc-shard-report", "format_version": 1, "command": "pack",
//	 "shard": "2/8", "shards": ["2/8"], "source": "<folder as given>",
//	 "created": "<RFC 3339 UTC>", "software": "muarc 0.1.0",
//	 "files": [{"path", "bytes", "mtime_ns", "sha256", "status",
//	            "validation_errors", "identifying", "message"}, ...],
//	 "summary": {"files", "bytes", "ok", "refused", "error", "skipped"}}
//
// A merged report has shard "n/n merged" and lists the shards it holds.
// Files are sorted by path.
type ShardReport struct {
	Format        string       `json:"format"`
	FormatVersion int          `json:"format_version"`
	Command       string       `json:"command"`
	Shard         string       `json:"shard"`
	Shards        []string     `json:"shards"`
	Source        string       `json:"source"`
	Created       string       `json:"created"`
	Software      string       `json:"software"`
	Files         []FileRecord `json:"files"`
	Summary       Summary      `json:"summary"`
}

// Summary counts a report's files by status; Bytes sums the sizes of the
// files with status ok.
type Summary struct {
	Files   int   `json:"files"`
	Bytes   int64 `json:"bytes"`
	OK      int   `json:"ok"`
	Refused int   `json:"refused"`
	Error   int   `json:"error"`
	Skipped int   `json:"skipped"`
}

func summarise(files []FileRecord) Summary {
	s := Summary{Files: len(files)}
	for _, f := range files {
		switch f.Status {
		case StatusOK:
			s.OK++
			s.Bytes += f.Bytes
		case StatusRefused:
			s.Refused++
		case StatusSkipped:
			s.Skipped++
		default:
			s.Error++
		}
	}
	return s
}

// NewShardReport builds a report for a run over source.
func NewShardReport(command, source string, shard batch.Shard, files []FileRecord) *ShardReport {
	sorted := append([]FileRecord(nil), files...)
	sort.Slice(sorted, func(i, j int) bool { return sorted[i].Path < sorted[j].Path })
	return &ShardReport{Format: ReportFormat, FormatVersion: ReportFormatVersion, Command: command,
		Shard: shard.String(), Shards: []string{shard.String()}, Source: source,
		Created: time.Now().UTC().Format(time.RFC3339), Software: schema.Software,
		Files: sorted, Summary: summarise(sorted)}
}

// ReadShardReport reads and checks one report file.
func ReadShardReport(path string) (*ShardReport, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseShardReport(data, path)
}

// ParseShardReport reads a shard report from data; name is used in errors.
func ParseShardReport(data []byte, path string) (*ShardReport, error) {
	var r ShardReport
	dec := json.NewDecoder(bytes.NewReader(data))
	if err := dec.Decode(&r); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			line, col := lineCol(data, se.Offset)
			return nil, fmt.Errorf("%s:%d:%d: %v (is this a shard report written by muarc?)", path, line, col, err)
		}
		return nil, fmt.Errorf("%s: %v (is this a shard report written by muarc?)", path, err)
	}
	if r.Format != ReportFormat {
		return nil, fmt.Errorf("%s: format %q, want %q (give the JSON reports written with --shard)", path, r.Format, ReportFormat)
	}
	if r.FormatVersion > ReportFormatVersion {
		return nil, fmt.Errorf("%s: report format version %d is newer than this muarc reads (%d); upgrade muarc", path, r.FormatVersion, ReportFormatVersion)
	}
	if r.FormatVersion < 1 {
		return nil, fmt.Errorf("%s: report format version %d; want 1", path, r.FormatVersion)
	}
	for i, f := range r.Files {
		if f.Path == "" || strings.HasPrefix(f.Path, "/") || f.Bytes < 0 {
			return nil, fmt.Errorf("%s: files[%d]: path %q, bytes %d: want a relative path and a size", path, i, f.Path, f.Bytes)
		}
		if f.SHA256 != "" && !isHex64(f.SHA256) {
			return nil, fmt.Errorf("%s: files[%d] (%s): sha256 %q is not 64 lower-case hex digits", path, i, f.Path, f.SHA256)
		}
	}
	return &r, nil
}

func lineCol(data []byte, off int64) (int, int) {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	before := data[:off]
	line := bytes.Count(before, []byte("\n")) + 1
	col := int(off) - bytes.LastIndexByte(before, '\n')
	return line, col
}

// MergeResult is the outcome of merging shard reports.
type MergeResult struct {
	Report *ShardReport
	// Missing lists shards "i/n" that no input held; Problems lists
	// conflicts (a file in two shards with different contents, reports of
	// different runs). A merge with either is incomplete.
	Missing  []string
	Problems []string
}

// MergeReports combines shard reports of one sharded run: it checks they
// belong together (same command, same shard count), that no shard is given
// twice and none is missing, and that a file listed by two shards agrees.
// The merged report lists every file once.
func MergeReports(reports []*ShardReport, names []string) *MergeResult {
	res := &MergeResult{}
	if len(reports) == 0 {
		res.Problems = append(res.Problems, "no reports given")
		return res
	}
	first := reports[0]
	total := 0
	have := map[string]string{}
	byPath := map[string]FileRecord{}
	from := map[string]string{}
	for k, r := range reports {
		name := names[k]
		if r.Command != first.Command {
			res.Problems = append(res.Problems, fmt.Sprintf("%s: command %q, but %s has %q; merge reports of one run", name, r.Command, names[0], first.Command))
		}
		if r.Source != first.Source {
			res.Problems = append(res.Problems, fmt.Sprintf("%s: source %q, but %s has %q (reported, not refused: the same study may be mounted at two paths)", name, r.Source, names[0], first.Source))
		}
		for _, s := range r.Shards {
			sh, err := batch.ParseShard(strings.Fields(s)[0])
			if err != nil {
				res.Problems = append(res.Problems, fmt.Sprintf("%s: %v", name, err))
				continue
			}
			if total == 0 {
				total = sh.N
			} else if sh.N != total {
				res.Problems = append(res.Problems, fmt.Sprintf("%s: shard %s is of %d parts, others of %d", name, sh, sh.N, total))
			}
			if prev, dup := have[sh.String()]; dup {
				res.Problems = append(res.Problems, fmt.Sprintf("%s: shard %s already given by %s", name, sh, prev))
			}
			have[sh.String()] = name
		}
		for _, f := range r.Files {
			if prev, ok := byPath[f.Path]; ok {
				if prev.SHA256 != f.SHA256 || prev.Bytes != f.Bytes || prev.Status != f.Status {
					res.Problems = append(res.Problems, fmt.Sprintf("%s: %s differs from its entry in %s (sha256 %s vs %s)", name, f.Path, from[f.Path], f.SHA256, prev.SHA256))
				}
				continue
			}
			byPath[f.Path] = f
			from[f.Path] = name
		}
	}
	for i := 1; i <= total; i++ {
		s := fmt.Sprintf("%d/%d", i, total)
		if _, ok := have[s]; !ok {
			res.Missing = append(res.Missing, s)
		}
	}
	files := make([]FileRecord, 0, len(byPath))
	for _, k := range sortedKeys(byPath) {
		files = append(files, byPath[k])
	}
	shards := sortedKeys(have)
	sort.Slice(shards, func(i, j int) bool {
		a, _ := batch.ParseShard(shards[i])
		b, _ := batch.ParseShard(shards[j])
		return a.I < b.I
	})
	res.Report = &ShardReport{Format: ReportFormat, FormatVersion: ReportFormatVersion, Command: first.Command,
		Shard: fmt.Sprintf("%d/%d merged", len(shards), total), Shards: shards, Source: first.Source,
		Created: time.Now().UTC().Format(time.RFC3339), Software: schema.Software,
		Files: files, Summary: summarise(files)}
	return res
}

// Manifest renders the ok files of a report as manifest lines
// "<sha256>  <path>" with paths relative to the source folder, so that
// `cd SOURCE && sha256sum -c MANIFEST` checks them.
func (r *ShardReport) Manifest() []byte { return bagit.FormatManifest(r.ManifestEntries()) }

// MergeManifests combines manifest files (lines "<sha256>  <path>", as
// merge-reports --manifest or sha256sum write them) into one entry list,
// sorted by path. A path listed with two different sums is a problem.
func MergeManifests(lists [][]bagit.Entry, names []string) ([]bagit.Entry, []string) {
	by := map[string]bagit.Entry{}
	from := map[string]string{}
	var problems []string
	for k, es := range lists {
		for _, e := range es {
			if prev, ok := by[e.Path]; ok {
				if prev.Sum != e.Sum {
					problems = append(problems, fmt.Sprintf("%s: %s has sha256 %s, but %s says %s", names[k], e.Path, e.Sum, from[e.Path], prev.Sum))
				}
				continue
			}
			by[e.Path] = e
			from[e.Path] = names[k]
		}
	}
	out := make([]bagit.Entry, 0, len(by))
	for _, k := range sortedKeys(by) {
		out = append(out, by[k])
	}
	return out, problems
}

// ManifestEntries returns a report's ok files as manifest entries.
func (r *ShardReport) ManifestEntries() []bagit.Entry {
	var es []bagit.Entry
	for _, f := range r.Files {
		if f.Status == StatusOK && f.SHA256 != "" {
			es = append(es, bagit.Entry{Path: f.Path, Sum: f.SHA256})
		}
	}
	return es
}
