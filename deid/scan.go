package deid

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
	"unicode/utf16"
)

// Leak is one original identifying value found in a file's bytes.
type Leak struct {
	// Needle is the value searched for. It may identify a person: show
	// String() (which masks it) to people, not Needle.
	Needle string `json:"needle"`
	// Encoding is how it was found: "utf-8" (ASCII letters matched without
	// regard to case), "utf-16le" or "utf-16be".
	Encoding string `json:"encoding"`
	// Offset is the byte offset of the first match in the file.
	Offset int64 `json:"offset"`
	// Count is how many matches there were in this encoding.
	Count int `json:"count"`
}

// String describes the leak without repeating the value in full.
func (l Leak) String() string {
	return fmt.Sprintf("%s found as %s at byte %d (%d time(s))", maskValue(l.Needle), l.Encoding, l.Offset, l.Count)
}

// maskValue shows the first and last character of a value and its length,
// so a report about a leak is not itself a leak.
func maskValue(s string) string {
	r := []rune(s)
	if len(r) <= 2 {
		return fmt.Sprintf("%q (%d characters)", strings.Repeat("*", len(r)), len(r))
	}
	return fmt.Sprintf("%q (%d characters)", string(r[0])+strings.Repeat("*", len(r)-2)+string(r[len(r)-1]), len(r))
}

// MinNeedleBytes is the shortest encoded needle ScanBytes searches for. A
// shorter byte string turns up by chance in compressed sample data (a given
// 3-byte string about 6 times in 100 MB of random bytes); shorter needles
// are reported by Unscannable. Matches of 4-7 bytes must also sit in text
// (see shortNeedle).
const MinNeedleBytes = 4

// MinNeedleRunes is the shortest original value searched for at all: one
// or two characters ("7", "B") occur everywhere and say nothing; such values
// are listed as not searched.
const MinNeedleRunes = 3

type needleForm struct {
	needle   string
	encoding string
	pat      []byte // ASCII letters lower-cased; the file's bytes are too
}

func needleForms(needles []string) []needleForm {
	var forms []needleForm
	seen := map[string]bool{}
	for _, n := range needles {
		if n == "" || seen[n] {
			continue
		}
		seen[n] = true
		if u := lowerASCII([]byte(n)); len(u) >= MinNeedleBytes {
			forms = append(forms, needleForm{n, "utf-8", u})
		}
		le, be := utf16Bytes(n)
		if len(le) >= MinNeedleBytes {
			forms = append(forms, needleForm{n, "utf-16le", lowerASCII(le)}, needleForm{n, "utf-16be", lowerASCII(be)})
		}
	}
	return forms
}

// lowerTab maps each byte to itself, ASCII capitals to small letters (a
// table: no branch on random data).
var lowerTab = func() (t [256]byte) {
	for i := range t {
		t[i] = byte(i)
		if i >= 'A' && i <= 'Z' {
			t[i] = byte(i + 32)
		}
	}
	return t
}()

func lowerASCII(b []byte) []byte {
	for i, c := range b {
		b[i] = lowerTab[c]
	}
	return b
}

func utf16Bytes(s string) (le, be []byte) {
	for _, u := range utf16.Encode([]rune(s)) {
		le = append(le, byte(u), byte(u>>8))
		be = append(be, byte(u>>8), byte(u))
	}
	return le, be
}

// Unscannable returns the needles too short to search for in any encoding
// (fewer than MinNeedleBytes bytes even as UTF-16).
func Unscannable(needles []string) []string {
	var out []string
	for _, n := range needles {
		le, _ := utf16Bytes(n)
		if n != "" && len(le) < MinNeedleBytes {
			out = append(out, n)
		}
	}
	return out
}

// ScanBytes reads the raw bytes of the file at path and reports every needle
// found in it as UTF-8 (ASCII letters without regard to case), UTF-16LE or
// UTF-16BE. A match counts only at token boundaries (bounded): "Hallbeck"
// is found in "Hallbeck01", "Ana" is not found inside "analysis". The file is read in blocks; memory stays flat. Needles shorter
// than MinNeedleBytes in an encoding are not searched in it (see
// Unscannable).
func ScanBytes(path string, needles []string) ([]Leak, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return scanReader(f, needles)
}

// scanBlock is how much the scan reads at a time (a variable for tests).
var scanBlock int64 = 1 << 20

// scanReader searches r in one pass for every form (Wu and Manber's
// multi-pattern search over 2-byte blocks, "A fast algorithm for
// multi-pattern searching", 1994): a table over every 2-byte block says
// how far the next possible match start is from the block ending at the
// fourth byte of the current position; only where it says 0 does a map on
// the position's first four bytes pick the candidate forms, which are
// compared in full. ASCII letters are compared through lowerTab, without
// a lower-cased copy of the data.
func scanReader(r io.Reader, needles []string) ([]Leak, error) {
	forms := needleForms(needles)
	if len(forms) == 0 {
		return nil, nil
	}
	maxLen := 0
	// shift[block] is how many positions can be skipped when the 2-byte
	// block (lower-cased) ends at the current position's fourth byte: 3
	// when no form's first four bytes hold it, less where one does (0:
	// a form may start here).
	const window = MinNeedleBytes // every form is at least this long
	var shift [1 << 16]uint8
	for i := range shift {
		shift[i] = window - 1
	}
	// held has a bit for every 2-byte block, as it may stand in the data
	// (either case of a letter), that shift does not give the full skip
	// for: 8 KiB that stay in the cache where shift's 64 KiB would not.
	var held [1 << 16 / 64]uint64
	by4 := map[uint32][]int{}
	for i, f := range forms {
		maxLen = max(maxLen, len(f.pat))
		for j := 1; j < window; j++ {
			b := uint16(f.pat[j-1])<<8 | uint16(f.pat[j])
			shift[b] = min(shift[b], uint8(window-1-j))
			for _, x := range caseVariants(f.pat[j-1]) {
				for _, y := range caseVariants(f.pat[j]) {
					v := uint16(x)<<8 | uint16(y)
					held[v/64] |= 1 << (v % 64)
				}
			}
		}
		p4 := binary.BigEndian.Uint32(f.pat)
		by4[p4] = append(by4[p4], i)
	}
	found := make([]Leak, len(forms))
	margin := maxLen + ctxBytes // a match and the bytes after it
	orig := make([]byte, 0, int(scanBlock)+margin+2)
	var base int64 // file offset of orig[0]
	next := 0      // first position of orig not yet examined
	for {
		n, err := io.ReadFull(r, orig[len(orig):cap(orig)])
		orig = orig[:len(orig)+n]
		eof := err == io.EOF || errors.Is(err, io.ErrUnexpectedEOF)
		if err != nil && !eof {
			return nil, err
		}
		limit := len(orig) - margin
		if eof {
			limit = len(orig)
		}
		for i := next; i < limit && i+window <= len(orig); {
			b := uint16(orig[i+window-2])<<8 | uint16(orig[i+window-1])
			if held[b/64]&(1<<(b%64)) == 0 {
				i += window - 1
				continue
			}
			if s := shift[uint16(lowerTab[b>>8])<<8|uint16(lowerTab[b&0xff])]; s > 0 {
				i += int(s)
				continue
			}
			p4 := uint32(lowerTab[orig[i]])<<24 | uint32(lowerTab[orig[i+1]])<<16 | uint32(lowerTab[orig[i+2]])<<8 | uint32(lowerTab[orig[i+3]])
			for _, fi := range by4[p4] {
				f := &forms[fi]
				end := i + len(f.pat)
				if end > len(orig) || !equalLower(orig[i:end], f.pat) || !bounded(orig, i, end, f.encoding) {
					continue
				}
				if len(f.pat) < shortNeedle && !textContext(orig, i, end, base == 0, eof) {
					continue
				}
				if found[fi].Count == 0 {
					found[fi] = Leak{Needle: f.needle, Encoding: f.encoding, Offset: base + int64(i)}
				}
				found[fi].Count++
			}
			i++
		}
		if eof {
			break
		}
		// Keep the bytes before the next position for the context tests.
		// (A skip past limit covered positions where nothing starts:
		// looking at them again finds nothing.)
		cut := max(limit-ctxBytes, 0)
		copy(orig, orig[cut:])
		orig = orig[:len(orig)-cut]
		base += int64(cut)
		next = limit - cut
	}
	var out []Leak
	for _, l := range found {
		if l.Count > 0 {
			out = append(out, l)
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Offset < out[j].Offset })
	return out, nil
}

// caseVariants are the bytes that lower-case to c (c itself, and the
// capital of a small ASCII letter).
func caseVariants(c byte) []byte {
	if c >= 'a' && c <= 'z' {
		return []byte{c, c - 32}
	}
	return []byte{c}
}

// equalLower reports whether hay, its ASCII letters lower-cased, is pat.
func equalLower(hay, pat []byte) bool {
	if len(hay) != len(pat) {
		return false
	}
	for i, c := range hay {
		if lowerTab[c] != pat[i] {
			return false
		}
	}
	return true
}

// shortNeedle is the encoded length below which a match must also sit in
// text (textContext): a 4-byte value matched without regard to case turns
// up by chance in compressed samples about once in 450 MB (16 case variants
// of a 4-letter word, 2^-32 each, 0.6 for the boundary bytes); text
// context cuts that about 150-fold. From 8 bytes on chance matches are
// negligible (below 2^-56 per position).
const shortNeedle = 8

// ctxBytes is how many bytes on each side textContext looks at.
const ctxBytes = 8

// textContext reports whether the ctxBytes bytes on each side of a match
// look like stored text: at least three quarters of them NUL, tab, line
// breaks or printable ASCII, as around strings in HDF5 headers and heaps.
// Bytes before the file's start or after its end count as text.
func textContext(hay []byte, pos, end int, atStart, atEOF bool) bool {
	ok, n := 0, 0
	look := func(i int) {
		n++
		if i < 0 || i >= len(hay) {
			if i < 0 && atStart || i >= len(hay) && atEOF {
				ok++
			}
			return
		}
		c := hay[i]
		if c == 0 || c == '\t' || c == '\n' || c == '\r' || c >= 0x20 && c < 0x7f {
			ok++
		}
	}
	for k := 1; k <= ctxBytes; k++ {
		look(pos - k)
		look(end + k - 1)
	}
	return 4*ok >= 3*n
}

// bounded reports whether the match hay[pos:end] (hay in its original
// case) starts and ends at a token boundary, so an identifier is found
// inside a longer token ("Hallbeck01", "S01Hallbeck", "AnnaHallbeck",
// "hallbeck_s01") but not inside an ordinary word ("Ana" in "analysis",
// "Ella" in "patella"). An end of the match that is a letter needs a
// neighbour that is not a letter, or a change from small to capital letter
// between them; an end that is a digit needs a neighbour that is not a
// digit. A character outside ASCII counts as a boundary (in raw bytes it is
// mostly binary data; a miss there is worse than a doubtful match).
func bounded(hay []byte, pos, end int, enc string) bool {
	w := 1
	if enc == "utf-16le" || enc == "utf-16be" {
		w = 2
	}
	unit := func(i int) (byte, bool) {
		if i < 0 || i+w > len(hay) {
			return 0, false
		}
		switch enc {
		case "utf-16le":
			if hay[i+1] != 0 {
				return 0x80, true
			}
			return hay[i], true
		case "utf-16be":
			if hay[i] != 0 {
				return 0x80, true
			}
			return hay[i+1], true
		}
		return hay[i], true
	}
	first, _ := unit(pos)
	last, _ := unit(end - w)
	if prev, ok := unit(pos - w); ok && !edge(prev, first) {
		return false
	}
	if next, ok := unit(end); ok && !edge(last, next) {
		return false
	}
	return true
}

// edge reports whether a token boundary lies between the characters a and
// b (a before b), one of them part of the match: no boundary inside a run
// of letters (except from a small to a capital letter) or of digits.
func edge(a, b byte) bool {
	switch {
	case isLetter(a) && isLetter(b):
		return isLower(a) && isUpper(b)
	case isDigit(a) && isDigit(b):
		return false
	}
	return true
}

func isLower(c byte) bool  { return c >= 'a' && c <= 'z' }
func isUpper(c byte) bool  { return c >= 'A' && c <= 'Z' }
func isDigit(c byte) bool  { return c >= '0' && c <= '9' }
func isLetter(c byte) bool { return isLower(c) || isUpper(c) }

// scanText searches decoded text (a metadata view as JSON, a string column)
// for needles at token boundaries (bounded), ASCII letters without regard
// to case. It finds what compression hides from ScanBytes.
func scanText(text string, needles []string) []string {
	orig := []byte(text)
	low := string(lowerASCII([]byte(text)))
	var hits []string
	seen := map[string]bool{}
	for _, n := range needles {
		if len([]rune(n)) < MinNeedleRunes || seen[n] {
			continue
		}
		seen[n] = true
		pat := string(lowerASCII([]byte(n)))
		for at := 0; at < len(low); {
			j := strings.Index(low[at:], pat)
			if j < 0 {
				break
			}
			pos := at + j
			if bounded(orig, pos, pos+len(pat), "utf-8") {
				hits = append(hits, n)
				break
			}
			at = pos + 1
		}
	}
	return hits
}

// viewText joins every string of a decoded metadata view (JSON-like maps
// and lists) with newlines, unescaped, for scanText.
func viewText(v any) string {
	var b strings.Builder
	var walk func(any)
	walk = func(v any) {
		switch x := v.(type) {
		case string:
			b.WriteString(x)
			b.WriteByte('\n')
		case map[string]any:
			for k, e := range x {
				b.WriteString(k)
				b.WriteByte('\n')
				walk(e)
			}
		case []any:
			for _, e := range x {
				walk(e)
			}
		case []string:
			for _, e := range x {
				walk(e)
			}
		default:
			if x != nil {
				b.WriteString(fmt.Sprint(x))
				b.WriteByte('\n')
			}
		}
	}
	walk(v)
	return b.String()
}
