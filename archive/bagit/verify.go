package bagit

import (
	"bytes"
	"crypto/md5"
	"crypto/sha1"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"

	"muarc/internal/batch"
)

// Problem kinds reported by Verify.
const (
	KindDeclaration = "declaration"  // bagit.txt missing or wrong
	KindNoPayload   = "no-payload"   // data/ missing
	KindManifest    = "manifest"     // a manifest missing, unreadable or malformed
	KindMissing     = "missing"      // listed in a manifest, not on disk
	KindUnlisted    = "unlisted"     // payload file on disk, not in a manifest
	KindMismatch    = "mismatch"     // checksum differs: bit rot or an edited file
	KindOxum        = "payload-oxum" // Payload-Oxum disagrees with the payload
	KindUnreadable  = "unreadable"   // a file could not be read
	KindNotRegular  = "not-regular"  // a symbolic link or special file in the bag
	KindFetch       = "fetch"        // fetch.txt lists files to fetch: not complete
	KindInfo        = "bag-info"     // bag-info.txt malformed
)

// Problem is one finding about a bag. File is bag-relative (slash-separated)
// when the finding is about one file.
type Problem struct {
	Kind string `json:"kind"`
	File string `json:"file,omitempty"`
	Msg  string `json:"message"`
}

func (p Problem) String() string {
	if p.File != "" {
		return p.Kind + ": " + p.File + ": " + p.Msg
	}
	return p.Kind + ": " + p.Msg
}

// VerifyOptions tune Verify.
type VerifyOptions struct {
	// Workers is the number of files hashed at once (0: one per CPU).
	Workers int
	// Progress, when not nil, is called with the bytes hashed since the last
	// call (from several goroutines, one at a time).
	Progress func(n int64)
	// Files, when not nil, is called once per payload file found, with its
	// bag-relative path (used by callers that go on to check contents).
	Files func(rel string)
}

// VerifyResult sums up a check of a bag.
type VerifyResult struct {
	// PayloadFiles and PayloadBytes are what was found under data/.
	PayloadFiles int64 `json:"payload_files"`
	PayloadBytes int64 `json:"payload_bytes"`
	// Manifests are the manifest file names read (payload and tag).
	Manifests []string  `json:"manifests"`
	Problems  []Problem `json:"problems"`
	// Payload lists the payload files found (bag-relative, sorted).
	Payload []string `json:"-"`
}

// Complete reports whether no problem was found: the bag is complete and
// valid in the sense of RFC 8493 section 3.
func (r *VerifyResult) Complete() bool { return len(r.Problems) == 0 }

// Verify checks the bag in dir against RFC 8493: the declaration, that every
// payload file is listed in every payload manifest and every listed file
// exists ("complete"), that every checksum in every payload and tag manifest
// matches ("valid"), and that Payload-Oxum, when given, agrees. Files are
// read once, hashed for all algorithms at once, on parallel workers.
//
// It is stricter than the RFC in one place: a tag file (outside data/) that a
// tag manifest does not list is reported as unlisted when the bag has a tag
// manifest, since a muarc deposit lists all of its tag files. An error is
// returned only when dir cannot be read at all.
func Verify(dir string, opt VerifyOptions) (*VerifyResult, error) {
	st, err := os.Stat(dir)
	if err != nil {
		return nil, err
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("%s: not a folder (a bag is a folder; give the tar's extracted folder)", dir)
	}
	res := &VerifyResult{}
	add := func(kind, file, msg string, args ...any) {
		res.Problems = append(res.Problems, Problem{kind, file, fmt.Sprintf(msg, args...)})
	}

	// Declaration (RFC 8493 section 2.1.1), in its exact form.
	if decl, err := os.ReadFile(filepath.Join(dir, DeclarationFile)); err != nil {
		add(KindDeclaration, DeclarationFile, "cannot read the bag declaration: %v", err)
	} else if v, enc, err := ParseDeclaration(decl, DeclarationFile); err != nil {
		var le *LineError
		if errors.As(err, &le) {
			add(KindDeclaration, DeclarationFile, "line %d: %s", le.Line, le.Msg)
		} else {
			add(KindDeclaration, DeclarationFile, "%v", err)
		}
	} else {
		if v != "1.0" && v != "0.97" {
			add(KindDeclaration, DeclarationFile, "BagIt-Version %q: this reader knows 1.0 (and 0.97)", v)
		}
		if !strings.EqualFold(enc, "UTF-8") {
			add(KindDeclaration, DeclarationFile, "Tag-File-Character-Encoding %q: this reader reads UTF-8 only", enc)
		}
	}

	// Walk the bag: payload files under data/, tag files elsewhere.
	var payload, tagFiles []string
	sizes := map[string]int64{}
	if st, err := os.Stat(filepath.Join(dir, PayloadDir)); err != nil || !st.IsDir() {
		add(KindNoPayload, PayloadDir+"/", "the payload folder is missing")
	}
	err = filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			rel, _ := filepath.Rel(dir, p)
			add(KindUnreadable, filepath.ToSlash(rel), "%v", err)
			if d != nil && d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		rel, _ := filepath.Rel(dir, p)
		rel = filepath.ToSlash(rel)
		if !d.Type().IsRegular() {
			add(KindNotRegular, rel, "not a regular file (%v); bags hold plain files", d.Type())
			return nil
		}
		info, err := d.Info()
		if err != nil {
			add(KindUnreadable, rel, "%v", err)
			return nil
		}
		sizes[rel] = info.Size()
		if strings.HasPrefix(rel, PayloadDir+"/") {
			payload = append(payload, rel)
		} else {
			tagFiles = append(tagFiles, rel)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	sort.Strings(payload)
	res.Payload = payload
	for _, p := range payload {
		res.PayloadFiles++
		res.PayloadBytes += sizes[p]
		if opt.Files != nil {
			opt.Files(p)
		}
	}

	// Manifests.
	type manifest struct {
		name, alg string
		tag       bool
		entries   []Entry
	}
	var manifests []manifest
	for _, t := range tagFiles {
		if strings.Contains(t, "/") {
			continue
		}
		var alg string
		var tag bool
		switch {
		case strings.HasPrefix(t, "manifest-") && strings.HasSuffix(t, ".txt"):
			alg = strings.TrimSuffix(strings.TrimPrefix(t, "manifest-"), ".txt")
		case strings.HasPrefix(t, "tagmanifest-") && strings.HasSuffix(t, ".txt"):
			alg, tag = strings.TrimSuffix(strings.TrimPrefix(t, "tagmanifest-"), ".txt"), true
		default:
			continue
		}
		h := checkHash(alg)
		if h == nil {
			add(KindManifest, t, "algorithm %q is not supported here (sha256, sha512; md5 and sha1 are checked beside one of those); its checksums were not checked", alg)
			continue
		}
		f, err := os.Open(filepath.Join(dir, t))
		if err != nil {
			add(KindManifest, t, "%v", err)
			continue
		}
		entries, err := ParseManifest(f, t, 2*h.Size())
		f.Close()
		if err != nil {
			add(KindManifest, t, "%v", err)
			continue
		}
		manifests = append(manifests, manifest{t, alg, tag, entries})
		res.Manifests = append(res.Manifests, t)
	}
	var strong int
	var weak []string
	hasTagManifest := false
	for _, m := range manifests {
		switch {
		case m.tag:
			hasTagManifest = true
		case NewHash(m.alg) != nil:
			strong++
		default:
			weak = append(weak, m.name)
		}
	}
	switch {
	case strong == 0 && len(weak) > 0:
		add(KindManifest, strings.Join(weak, ", "), "%s", weakOnly(weak))
	case strong == 0:
		add(KindManifest, "", "no payload manifest (manifest-<algorithm>.txt) was found or could be read")
	}

	// Completeness: every manifest entry exists, every payload file is in
	// every payload manifest, and entries are on the right side of data/.
	want := map[string]map[string]string{} // file -> alg -> expected sum
	listedTag := map[string]bool{}
	for _, m := range manifests {
		listed := map[string]bool{}
		for _, e := range m.entries {
			inPayload := strings.HasPrefix(e.Path, PayloadDir+"/")
			if m.tag && inPayload {
				add(KindManifest, m.name, "lists payload file %s; a tag manifest lists tag files only", e.Path)
				continue
			}
			if !m.tag && !inPayload {
				add(KindManifest, m.name, "lists %s, which is outside data/", e.Path)
				continue
			}
			listed[e.Path] = true
			if m.tag {
				listedTag[e.Path] = true
			}
			if _, ok := sizes[e.Path]; !ok {
				add(KindMissing, e.Path, "listed in %s but not in the bag", m.name)
				continue
			}
			if want[e.Path] == nil {
				want[e.Path] = map[string]string{}
			}
			want[e.Path][m.alg+"\x00"+m.name] = e.Sum
		}
		if !m.tag {
			for _, p := range payload {
				if !listed[p] {
					add(KindUnlisted, p, "in the payload but not listed in %s", m.name)
				}
			}
		}
	}
	if hasTagManifest {
		for _, t := range tagFiles {
			if !listedTag[t] && !(strings.HasPrefix(t, "tagmanifest-") && !strings.Contains(t, "/")) {
				add(KindUnlisted, t, "tag file not listed in any tag manifest")
			}
		}
	}

	// Payload-Oxum (RFC 8493 section 2.2.2), when bag-info.txt gives one.
	if data, err := os.ReadFile(filepath.Join(dir, InfoFile)); err == nil {
		if fields, err := ParseInfo(bytes.NewReader(data), InfoFile); err != nil {
			add(KindInfo, InfoFile, "%v", err)
		} else if ox, ok := Lookup(fields, "Payload-Oxum"); ok {
			octets, files, err := ParsePayloadOxum(ox)
			if err != nil {
				add(KindOxum, InfoFile, "%v", err)
			} else if octets != res.PayloadBytes || files != res.PayloadFiles {
				add(KindOxum, InfoFile, "Payload-Oxum says %d bytes in %d files; the payload has %d bytes in %d files",
					octets, files, res.PayloadBytes, res.PayloadFiles)
			}
		}
	} else if !errors.Is(err, fs.ErrNotExist) {
		add(KindInfo, InfoFile, "%v", err)
	}

	// fetch.txt: a bag whose fetch list is not empty is not complete here.
	if data, err := os.ReadFile(filepath.Join(dir, "fetch.txt")); err == nil && len(bytes.TrimSpace(data)) > 0 {
		add(KindFetch, "fetch.txt", "lists files to fetch; fetch them before verifying")
	}

	// Validity: hash every listed file once for all its algorithms.
	files := make([]string, 0, len(want))
	for f := range want {
		files = append(files, f)
	}
	sort.Strings(files)
	found := make([][]Problem, len(files))
	batch.Run(len(files), opt.Workers, func(i int) error {
		rel := files[i]
		exp := want[rel]
		keys := make([]string, 0, len(exp))
		for k := range exp {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		hs := map[string]hash.Hash{}
		var ws []io.Writer
		for _, k := range keys {
			alg, _, _ := strings.Cut(k, "\x00")
			if hs[alg] == nil {
				hs[alg] = checkHash(alg)
				ws = append(ws, hs[alg])
			}
		}
		f, err := os.Open(filepath.Join(dir, filepath.FromSlash(rel)))
		if err != nil {
			found[i] = append(found[i], Problem{KindUnreadable, rel, err.Error()})
			return nil
		}
		defer f.Close()
		buf := make([]byte, BufferSize)
		w := io.MultiWriter(ws...)
		for {
			k, err := f.Read(buf)
			if k > 0 {
				w.Write(buf[:k])
				if opt.Progress != nil {
					opt.Progress(int64(k))
				}
			}
			if err == io.EOF {
				break
			}
			if err != nil {
				found[i] = append(found[i], Problem{KindUnreadable, rel, err.Error()})
				return nil
			}
		}
		sums := map[string]string{}
		for alg, h := range hs {
			sums[alg] = hex.EncodeToString(h.Sum(nil))
		}
		for _, k := range keys {
			alg, name, _ := strings.Cut(k, "\x00")
			if sums[alg] != exp[k] {
				found[i] = append(found[i], Problem{KindMismatch, rel,
					fmt.Sprintf("%s checksum %s does not match %s in %s (the file changed: bit rot, a copy fault or an edit)", alg, sums[alg], exp[k], name)})
			}
		}
		return nil
	}, nil)
	for _, ps := range found {
		res.Problems = append(res.Problems, ps...)
	}
	return res, nil
}

// Join makes a bag-relative path from slash-separated parts.
func Join(parts ...string) string { return path.Join(parts...) }

// checkHash returns a hash for checking a manifest: the algorithms of
// NewHash, and MD5 and SHA-1, which older bags carry (RFC 8493 section 2.4,
// from memory, asks readers to keep supporting them for backwards
// compatibility). A bag whose payload manifests are all MD5 or SHA-1 is
// still refused (see weakOnly); beside a SHA-2 manifest they are checked
// like any other.
func checkHash(alg string) hash.Hash {
	switch alg {
	case "md5":
		return md5.New()
	case "sha1":
		return sha1.New()
	}
	return NewHash(alg)
}

// weakOnly explains why a bag with only MD5 or SHA-1 payload manifests is
// refused, and what to do.
func weakOnly(names []string) string {
	var algs, checks []string
	for _, n := range names {
		alg := strings.TrimSuffix(strings.TrimPrefix(n, "manifest-"), ".txt")
		algs = append(algs, alg)
		checks = append(checks, alg+"sum -c "+n)
	}
	return strings.Join(algs, " and ") + " manifests are not accepted: collisions can be made for MD5 and SHA-1 " +
		"(RFC 6151, RFC 6194), so matching sums cannot show that nothing was changed, and " +
		"RFC 8493 section 2.4 makes SHA-256 and SHA-512 the algorithms every tool supports. " +
		"Check the bag with its own manifest first (in the bag folder: " + strings.Join(checks, "; ") + "), " +
		"then add a SHA-256 payload manifest (find data -type f -exec sha256sum {} + > manifest-sha256.txt) " +
		"and verify again; a muarc deposit is simply packed again"
}
