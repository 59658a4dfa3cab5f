// Package bagit reads and writes the pieces of a BagIt 1.0 bag (RFC 8493):
// the bag declaration, payload and tag manifests, the bag-info metadata and
// the Payload-Oxum, and checks a bag on disk for completeness and validity.
// It knows nothing about recordings; package archive builds deposits on it.
//
// Paths inside a bag are slash-separated and relative to the bag's base
// folder ("data/recordings/s01.h5"). In manifests they are written with the
// percent-encoding RFC 8493 section 2.1.3 asks for: CR as %0D, LF as %0A and
// "%" itself as %25.
package bagit

import (
	"bufio"
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"fmt"
	"hash"
	"io"
	"os"
	"sort"
	"strconv"
	"strings"
)

// Declaration is the exact content of bagit.txt for a BagIt 1.0 bag with
// UTF-8 tag files (RFC 8493 section 2.1.1).
const Declaration = "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n"

// Names of the files this package writes in a bag's base folder.
const (
	DeclarationFile = "bagit.txt"
	InfoFile        = "bag-info.txt"
	PayloadDir      = "data"
)

// ManifestName returns the payload manifest's file name for algorithm alg
// ("sha256" -> "manifest-sha256.txt").
func ManifestName(alg string) string { return "manifest-" + alg + ".txt" }

// TagManifestName returns the tag manifest's file name for algorithm alg.
func TagManifestName(alg string) string { return "tagmanifest-" + alg + ".txt" }

// NewHash returns a hash for a manifest algorithm name ("sha256", "sha512"),
// or nil when the algorithm is not supported.
func NewHash(alg string) hash.Hash {
	switch alg {
	case "sha256":
		return sha256.New()
	case "sha512":
		return sha512.New()
	}
	return nil
}

// BufferSize is the read buffer used when hashing files (bytes). Large
// buffers keep system calls few; 1 MiB is past the point of diminishing
// returns on common disks and page caches.
const BufferSize = 1 << 20

// HashFile streams the file at path through SHA-256 and returns the
// lower-case hex digest and the number of bytes read. buf, when not nil, is
// used as the read buffer (its length sets the read size). Memory stays flat
// whatever the file's size.
func HashFile(path string, buf []byte) (sum string, n int64, err error) {
	f, err := os.Open(path)
	if err != nil {
		return "", 0, err
	}
	defer f.Close()
	return HashReader(f, sha256.New(), buf)
}

// HashReader streams r through h and returns the hex digest and the bytes
// read.
func HashReader(r io.Reader, h hash.Hash, buf []byte) (string, int64, error) {
	if buf == nil {
		buf = make([]byte, BufferSize)
	}
	// Plain read loop: io.CopyBuffer would be the same here, but spelling it
	// out keeps the hash out of any ReaderFrom/WriterTo shortcut.
	var n int64
	for {
		k, err := r.Read(buf)
		if k > 0 {
			h.Write(buf[:k])
			n += int64(k)
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			return "", n, err
		}
	}
	return hex.EncodeToString(h.Sum(nil)), n, nil
}

// Entry is one manifest line: a file's checksum and its bag-relative path.
type Entry struct {
	// Path is slash-separated and relative to the bag's base folder, not
	// percent-encoded.
	Path string
	// Sum is the lower-case hex checksum.
	Sum string
}

// EncodePath percent-encodes the characters RFC 8493 section 2.1.3 reserves
// in manifest paths: CR, LF and "%".
func EncodePath(p string) string {
	if !strings.ContainsAny(p, "\r\n%") {
		return p
	}
	var b strings.Builder
	for i := 0; i < len(p); i++ {
		switch p[i] {
		case '\r':
			b.WriteString("%0D")
		case '\n':
			b.WriteString("%0A")
		case '%':
			b.WriteString("%25")
		default:
			b.WriteByte(p[i])
		}
	}
	return b.String()
}

// DecodePath undoes EncodePath. Other percent sequences are an error: a
// conforming manifest has none, and guessing would make two names one.
func DecodePath(p string) (string, error) {
	if !strings.Contains(p, "%") {
		return p, nil
	}
	var b strings.Builder
	for i := 0; i < len(p); i++ {
		if p[i] != '%' {
			b.WriteByte(p[i])
			continue
		}
		if i+3 > len(p) {
			return "", fmt.Errorf("truncated percent sequence %q", p[i:])
		}
		switch strings.ToUpper(p[i+1 : i+3]) {
		case "0D":
			b.WriteByte('\r')
		case "0A":
			b.WriteByte('\n')
		case "25":
			b.WriteByte('%')
		default:
			return "", fmt.Errorf("percent sequence %q is not one of %%0D, %%0A, %%25", p[i:i+3])
		}
		i += 2
	}
	return b.String(), nil
}

// FormatManifest renders entries as manifest lines "<checksum>  <path>\n",
// sorted by path so that the same bag always gives the same bytes. Two
// spaces separate the fields (RFC 8493 allows one or more; two is what
// sha256sum writes, so `sha256sum -c` reads the file as it is).
func FormatManifest(entries []Entry) []byte {
	sorted := append([]Entry(nil), entries...)
	sort.Slice(sorted, func(i, j int) bool { return sorted[i].Path < sorted[j].Path })
	var b strings.Builder
	for _, e := range sorted {
		b.WriteString(e.Sum)
		b.WriteString("  ")
		b.WriteString(EncodePath(e.Path))
		b.WriteByte('\n')
	}
	return []byte(b.String())
}

// LineError is a problem on one line of a tag file.
type LineError struct {
	File string
	Line int
	Msg  string
}

func (e *LineError) Error() string { return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Msg) }

// ParseManifest reads manifest lines from r; name is the file name used in
// errors. hexLen is the digest length in hex characters (64 for SHA-256).
// Lines may end in LF or CRLF (RFC 8493 section 2.1.3 allows CR, LF or
// CRLF; a lone CR is taken as a line end too).
func ParseManifest(r io.Reader, name string, hexLen int) ([]Entry, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	var out []Entry
	seen := map[string]int{}
	for i, line := range splitLines(string(data)) {
		ln := i + 1
		if line == "" {
			continue
		}
		sum, rest, ok := cutSpace(line)
		if !ok {
			return nil, &LineError{name, ln, "want \"<checksum> <path>\", found no space"}
		}
		if len(sum) != hexLen || !isHex(sum) {
			return nil, &LineError{name, ln, fmt.Sprintf("checksum %q is not %d hex digits", sum, hexLen)}
		}
		path, err := DecodePath(rest)
		if err != nil {
			return nil, &LineError{name, ln, err.Error()}
		}
		if err := checkBagPath(path); err != nil {
			return nil, &LineError{name, ln, err.Error()}
		}
		if prev, dup := seen[path]; dup {
			return nil, &LineError{name, ln, fmt.Sprintf("path %q listed again (first on line %d)", path, prev)}
		}
		seen[path] = ln
		out = append(out, Entry{Path: path, Sum: strings.ToLower(sum)})
	}
	return out, nil
}

// splitLines splits on LF, CRLF or CR. A final line end gives no empty line.
func splitLines(s string) []string {
	s = strings.ReplaceAll(s, "\r\n", "\n")
	s = strings.ReplaceAll(s, "\r", "\n")
	s = strings.TrimSuffix(s, "\n")
	if s == "" {
		return nil
	}
	return strings.Split(s, "\n")
}

// cutSpace splits at the first run of linear white space (space or tab).
func cutSpace(line string) (string, string, bool) {
	i := strings.IndexAny(line, " \t")
	if i < 0 {
		return "", "", false
	}
	rest := strings.TrimLeft(line[i:], " \t")
	if rest == "" {
		return "", "", false
	}
	return line[:i], rest, true
}

func isHex(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f' || c >= 'A' && c <= 'F') {
			return false
		}
	}
	return true
}

// checkBagPath refuses paths that would leave the bag (RFC 8493 section
// 2.1.3: a manifest path must not reference outside the base folder) or are
// not clean relative paths.
func checkBagPath(p string) error {
	if p == "" {
		return fmt.Errorf("empty path")
	}
	if strings.HasPrefix(p, "/") {
		return fmt.Errorf("path %q is absolute", p)
	}
	for _, part := range strings.Split(p, "/") {
		if part == ".." {
			return fmt.Errorf("path %q leaves the bag", p)
		}
		if part == "" || part == "." {
			return fmt.Errorf("path %q is not a clean relative path", p)
		}
	}
	return nil
}

// Field is one "Label: value" line of bag-info.txt.
type Field struct{ Label, Value string }

// FormatInfo renders bag-info fields in order. A value with line ends is
// folded: each further line starts with a space, as RFC 8493 section 2.2.2
// allows for long values.
func FormatInfo(fields []Field) []byte {
	var b strings.Builder
	for _, f := range fields {
		b.WriteString(f.Label)
		b.WriteString(": ")
		lines := splitLines(f.Value)
		for i, l := range lines {
			if i > 0 {
				b.WriteString("\n  ")
			}
			b.WriteString(l)
		}
		b.WriteByte('\n')
	}
	return []byte(b.String())
}

// ParseInfo reads "Label: value" lines with continuation lines (starting
// with space or tab). Labels may repeat; order is kept.
func ParseInfo(r io.Reader, name string) ([]Field, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 64<<10), 16<<20)
	var out []Field
	ln := 0
	for sc.Scan() {
		ln++
		line := strings.TrimSuffix(sc.Text(), "\r")
		if line == "" {
			continue
		}
		if line[0] == ' ' || line[0] == '\t' {
			if len(out) == 0 {
				return nil, &LineError{name, ln, "continuation line before any label"}
			}
			out[len(out)-1].Value += "\n" + strings.TrimLeft(line, " \t")
			continue
		}
		label, value, ok := strings.Cut(line, ":")
		if !ok || strings.TrimSpace(label) == "" {
			return nil, &LineError{name, ln, "want \"Label: value\""}
		}
		out = append(out, Field{strings.TrimSpace(label), strings.TrimSpace(value)})
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return out, nil
}

// Lookup returns the first value for label (labels compare case-blind, as
// RFC 8493 section 2.2.2 recommends readers do) and whether it was found.
func Lookup(fields []Field, label string) (string, bool) {
	for _, f := range fields {
		if strings.EqualFold(f.Label, label) {
			return f.Value, true
		}
	}
	return "", false
}

// PayloadOxum formats the Payload-Oxum value "<octets>.<streams>": the
// payload's total size in bytes and its number of files (RFC 8493 section
// 2.2.2).
func PayloadOxum(octets, files int64) string {
	return strconv.FormatInt(octets, 10) + "." + strconv.FormatInt(files, 10)
}

// ParsePayloadOxum reads a Payload-Oxum value.
func ParsePayloadOxum(s string) (octets, files int64, err error) {
	a, b, ok := strings.Cut(strings.TrimSpace(s), ".")
	octets, err1 := strconv.ParseInt(a, 10, 64)
	files, err2 := strconv.ParseInt(b, 10, 64)
	if !ok || err1 != nil || err2 != nil || octets < 0 || files < 0 {
		return 0, 0, fmt.Errorf("Payload-Oxum %q is not <octets>.<files>", s)
	}
	return octets, files, nil
}
