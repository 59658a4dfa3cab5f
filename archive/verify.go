package archive

import (
	"fmt"
	"path/filepath"
	"sort"
	"strings"

	"muarc/archive/bagit"
	"muarc/h5"
	"muarc/internal/batch"
	"muarc/validate"
)

// Finding kinds of a deposit check beyond the bag's own (bagit.Kind*).
const (
	KindInvalid    = "invalid" // a recording fails validation
	KindChunk      = "chunk"   // an HDF5 chunk fails its Fletcher-32 checksum
	KindRecordRead = "unreadable-recording"
)

// Finding is one problem found in a deposit. File is bag-relative; Dataset
// (HDF5 path) and Chunk (the chunk's first element) locate bit rot inside a
// recording when its Fletcher-32 checksums find it.
type Finding struct {
	Kind    string `json:"kind"`
	File    string `json:"file,omitempty"`
	Dataset string `json:"dataset,omitempty"`
	Chunk   []int  `json:"chunk,omitempty"`
	Message string `json:"message"`
	// Accepted is set on a recording's finding when bag-info.txt names the
	// recording under Accepted-Damage (packed with --accept-damaged) and
	// its bytes still match the manifests: the damage is the one accepted
	// at packing, not new. Accepted findings do not fail the deposit.
	Accepted bool `json:"accepted,omitempty"`
}

func (f Finding) String() string {
	var b strings.Builder
	b.WriteString(f.Kind)
	if f.File != "" {
		b.WriteString(": " + f.File)
	}
	if f.Dataset != "" {
		b.WriteString(": " + f.Dataset)
	}
	if f.Chunk != nil {
		fmt.Fprintf(&b, " chunk at %v", f.Chunk)
	}
	b.WriteString(": " + f.Message)
	if f.Accepted {
		b.WriteString(" (accepted at packing: bag-info.txt " + acceptedDamageLabel + ")")
	}
	return b.String()
}

// DepositReport is the outcome of VerifyDeposit.
type DepositReport struct {
	Deposit      string    `json:"deposit"`
	PayloadFiles int64     `json:"payload_files"`
	PayloadBytes int64     `json:"payload_bytes"`
	Manifests    []string  `json:"manifests"`
	Recordings   int       `json:"recordings"`
	Chunks       int       `json:"chunks_checked"`
	Findings     []Finding `json:"findings"`
}

// OK reports whether nothing was found beyond damage accepted at packing.
func (r *DepositReport) OK() bool { return r.Failing() == 0 }

// Failing counts the findings that fail the deposit (all but Accepted).
func (r *DepositReport) Failing() int {
	n := 0
	for _, f := range r.Findings {
		if !f.Accepted {
			n++
		}
	}
	return n
}

// VerifyOptions tune VerifyDeposit.
type VerifyOptions struct {
	// Workers is the number of files read at once (0: one per CPU).
	Workers int
	// Progress, when not nil, gets the bytes hashed since its last call.
	Progress func(n int64)
}

// VerifyDeposit checks a deposit folder: first as a bag (bagit.Verify: the
// declaration, every payload file listed in every manifest and matching its
// checksum, nothing extra, Payload-Oxum, the tag manifest), then each
// recording under data/ (*.h5, *.hdf5): it must validate without errors,
// and every stored chunk must pass its Fletcher-32 checksum, so that bit rot
// is located by file and, inside a recording, by dataset and chunk. An error
// is returned only when the folder cannot be read at all.
func VerifyDeposit(dir string, opt VerifyOptions) (*DepositReport, error) {
	res, err := bagit.Verify(dir, bagit.VerifyOptions{Workers: opt.Workers, Progress: opt.Progress})
	if err != nil {
		return nil, err
	}
	rep := &DepositReport{Deposit: dir, PayloadFiles: res.PayloadFiles, PayloadBytes: res.PayloadBytes, Manifests: res.Manifests}
	for _, p := range res.Problems {
		rep.Findings = append(rep.Findings, Finding{Kind: p.Kind, File: p.File, Message: p.Msg})
	}
	var recs []string
	for _, p := range res.Payload {
		ext := strings.ToLower(filepath.Ext(p))
		if ext == ".h5" || ext == ".hdf5" {
			recs = append(recs, p)
		}
	}
	rep.Recordings = len(recs)
	found := make([][]Finding, len(recs))
	chunks := make([]int, len(recs))
	batch.Run(len(recs), opt.Workers, func(i int) error {
		rel := recs[i]
		full := filepath.Join(dir, filepath.FromSlash(rel))
		// Read once in a worker first when the program screens files
		// (validate.Screener): a recording that crashes the HDF5 library
		// is then a finding, not the end of verify.
		if err := validate.ScreenFirst(full, true); err != nil {
			found[i] = append(found[i], Finding{Kind: KindRecordRead, File: rel, Message: err.Error()})
			return nil
		}
		n, err := h5.VerifyChunks(full, func(c h5.ChunkFault) {
			msg := "Fletcher-32 checksum fails: the stored bytes changed (bit rot or an edit)"
			if c.Err != nil {
				msg = c.Err.Error()
			}
			found[i] = append(found[i], Finding{Kind: KindChunk, File: rel, Dataset: c.Dataset, Chunk: c.Offset, Message: msg})
		})
		chunks[i] = n
		if err != nil {
			found[i] = append(found[i], Finding{Kind: KindRecordRead, File: rel, Message: err.Error()})
			return nil
		}
		nerr, first, err := validateFile(full)
		if err != nil {
			found[i] = append(found[i], Finding{Kind: KindRecordRead, File: rel, Message: err.Error()})
			return nil
		}
		if nerr > 0 {
			found[i] = append(found[i], Finding{Kind: KindInvalid, File: rel,
				Message: fmt.Sprintf("%d validation errors: %s", nerr, strings.Join(first, "; "))})
		}
		return nil
	}, nil)
	accepted := acceptedInBag(dir, res.Problems)
	for i := range recs {
		rep.Chunks += chunks[i]
		if accepted[recs[i]] {
			for j := range found[i] {
				found[i][j].Accepted = true
			}
		}
		rep.Findings = append(rep.Findings, found[i]...)
	}
	sort.SliceStable(rep.Findings, func(i, j int) bool { return rep.Findings[i].File < rep.Findings[j].File })
	return rep, nil
}
