package recfile

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"slices"
	"strconv"
	"unicode/utf8"

	"muarc/h5"
)

// AttrMetadataSHA256 is the root attribute holding the metadata digest
// (since layout 1.1): the SHA-256, in lowercase hex, of CanonicalMetadata.
// HDF5 keeps no checksum over attributes and variable-length strings (the
// global heap), so without it a flipped byte in a channel label or a
// contact address goes unnoticed.
const AttrMetadataSHA256 = "metadata_sha256"

// CanonicalMetadata is the canonical metadata text of a file whose groups
// and datasets h5.File.Metadata listed; schema/LAYOUT.md ("Metadata
// digest") defines it so that any HDF5 reader can recompute it. It is one
// JSON object with a member per group and dataset (key: the absolute HDF5
// path), each an object with "attributes" (name -> value, every attribute
// but the root's metadata_sha256) and, for string datasets, "strings" (the
// values in storage order). Keys are sorted by code point, there is no
// whitespace, and all text is ASCII: strings are decoded as UTF-8 with
// every byte that is not part of valid UTF-8 taken as the lone surrogate
// U+DC00+byte, then escaped as Python's json.dumps(ensure_ascii=True) does.
// Integers are JSON integers, booleans JSON booleans, floating-point
// numbers {"f64": 16 lowercase hex digits of their IEEE 754 binary64 bits,
// big-endian}, arrays JSON arrays (flattened in storage order), values of
// other types null.
func CanonicalMetadata(objs []h5.MetaObject) []byte {
	ents := make([]entry, 0, len(objs))
	for _, o := range objs {
		var b []byte
		b = append(b, `{"attributes":{`...)
		attrs := make([]entry, 0, len(o.Attrs))
		for _, a := range o.Attrs {
			if o.Path == "/" && a.Name == AttrMetadataSHA256 {
				continue
			}
			attrs = append(attrs, entry{decodeEscaped(a.Name), canonicalValue(nil, a.Value)})
		}
		b = appendSortedMembers(b, attrs)
		b = append(b, '}')
		if o.StringDataset {
			b = append(b, `,"strings":`...)
			b = canonicalValue(b, o.Strings)
		}
		b = append(b, '}')
		ents = append(ents, entry{decodeEscaped(o.Path), b})
	}
	return append(appendSortedMembers([]byte{'{'}, ents), '}')
}

// entry is one member of a canonical JSON object: its key as code points
// (the order keys sort in) and its value's JSON text.
type entry struct {
	key []rune
	val []byte
}

// appendSortedMembers appends the members of an object, sorted by key
// code points and separated by commas, to b.
func appendSortedMembers(b []byte, ents []entry) []byte {
	slices.SortFunc(ents, func(x, y entry) int { return slices.Compare(x.key, y.key) })
	for i, e := range ents {
		if i > 0 {
			b = append(b, ',')
		}
		b = appendJSONString(b, e.key)
		b = append(b, ':')
		b = append(b, e.val...)
	}
	return b
}

// MetadataDigest is the lowercase hex SHA-256 of CanonicalMetadata(objs).
func MetadataDigest(objs []h5.MetaObject) string {
	s := sha256.Sum256(CanonicalMetadata(objs))
	return hex.EncodeToString(s[:])
}

// StoredDigest returns the root's metadata_sha256 attribute among objs
// ("" when absent or not a string).
func StoredDigest(objs []h5.MetaObject) string {
	for _, o := range objs {
		if o.Path != "/" {
			continue
		}
		for _, a := range o.Attrs {
			if a.Name == AttrMetadataSHA256 {
				s, _ := a.Value.(string)
				return s
			}
		}
	}
	return ""
}

func canonicalValue(b []byte, v any) []byte {
	switch x := v.(type) {
	case string:
		return appendJSONString(b, decodeEscaped(x))
	case int64:
		return strconv.AppendInt(b, x, 10)
	case bool:
		return strconv.AppendBool(b, x)
	case float64:
		return fmt.Appendf(b, `{"f64":"%016x"}`, math.Float64bits(x))
	case []string:
		return appendList(b, x)
	case []int64:
		return appendList(b, x)
	case []float64:
		return appendList(b, x)
	case []bool:
		return appendList(b, x)
	}
	return append(b, "null"...)
}

func appendList[T any](b []byte, xs []T) []byte {
	b = append(b, '[')
	for i, x := range xs {
		if i > 0 {
			b = append(b, ',')
		}
		b = canonicalValue(b, x)
	}
	return append(b, ']')
}

// decodeEscaped decodes s as UTF-8, taking each byte that is not part of
// valid UTF-8 as the lone surrogate U+DC00+byte (Python's
// "surrogateescape").
func decodeEscaped(s string) []rune {
	out := make([]rune, 0, len(s))
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && n == 1 {
			r = 0xDC00 + rune(s[i])
		}
		out = append(out, r)
		i += n
	}
	return out
}

// appendJSONString writes rs as an ASCII-only JSON string, escaped as
// Python's json.dumps(ensure_ascii=True): \" \\ \b \f \n \r \t, other
// characters outside U+0020..U+007E as \u followed by four lowercase hex
// digits (UTF-16 surrogate pairs above U+FFFF).
func appendJSONString(b []byte, rs []rune) []byte {
	b = append(b, '"')
	for _, r := range rs {
		switch r {
		case '"':
			b = append(b, `\"`...)
		case '\\':
			b = append(b, `\\`...)
		case '\b':
			b = append(b, `\b`...)
		case '\f':
			b = append(b, `\f`...)
		case '\n':
			b = append(b, `\n`...)
		case '\r':
			b = append(b, `\r`...)
		case '\t':
			b = append(b, `\t`...)
		default:
			switch {
			case r >= 0x20 && r <= 0x7e:
				b = append(b, byte(r))
			case r > 0xffff:
				r -= 0x10000
				b = fmt.Appendf(b, `\u%04x\u%04x`, 0xd800+(r>>10), 0xdc00+(r&0x3ff))
			default:
				b = fmt.Appendf(b, `\u%04x`, r)
			}
		}
	}
	return append(b, '"')
}
