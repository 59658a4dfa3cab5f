package bagit

import (
	"bytes"
	"fmt"
	"regexp"
	"strings"
	"unicode/utf8"
)

// The two lines of bagit.txt in the exact form RFC 8493 section 2.1.1 gives
// (from memory): "BagIt-Version: M.N" then "Tag-File-Character-Encoding:
// ENCODING", the label, a colon, one space and the value, nothing else.
var (
	versionLine  = regexp.MustCompile(`^BagIt-Version: ([0-9]+\.[0-9]+)$`)
	encodingLine = regexp.MustCompile(`^Tag-File-Character-Encoding: ([A-Za-z0-9][A-Za-z0-9._:+-]*)$`)

	versionValue  = regexp.MustCompile(`^[0-9]+\.[0-9]+$`)
	encodingValue = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._:+-]*$`)
)

// ParseDeclaration reads bagit.txt strictly, as RFC 8493 section 2.1.1
// asks (from memory): UTF-8 without a byte-order mark, exactly two lines
// in this order, "BagIt-Version: M.N" and "Tag-File-Character-Encoding:
// ENCODING", each ended by LF, CR or CRLF (a missing end on the last line is
// taken as its end). A line in another form (a space before the colon, a
// label in other letters, white space after the value) is a *LineError
// naming the line and the form to write instead; name is the file name used
// in errors.
func ParseDeclaration(data []byte, name string) (version, encoding string, err error) {
	if bytes.HasPrefix(data, []byte("\xef\xbb\xbf")) {
		return "", "", &LineError{name, 1, "starts with a byte-order mark, which RFC 8493 section 2.1.1 forbids; save the file as UTF-8 without a BOM"}
	}
	if !utf8.Valid(data) {
		return "", "", &LineError{name, 1, "not UTF-8; RFC 8493 section 2.1.1 asks for UTF-8"}
	}
	lines := splitLines(string(data))
	if len(lines) == 0 {
		return "", "", &LineError{name, 1, "empty; want \"BagIt-Version: 1.0\" then \"Tag-File-Character-Encoding: UTF-8\""}
	}
	if m := versionLine.FindStringSubmatch(lines[0]); m != nil {
		version = m[1]
	} else {
		return "", "", &LineError{name, 1, notInForm(lines[0], "BagIt-Version", "M.N", "1.0", versionValue)}
	}
	if len(lines) < 2 {
		return "", "", &LineError{name, 2, "missing; want \"Tag-File-Character-Encoding: UTF-8\" (RFC 8493 section 2.1.1: exactly two lines)"}
	}
	if m := encodingLine.FindStringSubmatch(lines[1]); m != nil {
		encoding = m[1]
	} else {
		return "", "", &LineError{name, 2, notInForm(lines[1], "Tag-File-Character-Encoding", "ENCODING", "UTF-8", encodingValue)}
	}
	if len(lines) > 2 {
		return "", "", &LineError{name, 3, fmt.Sprintf("%q: RFC 8493 section 2.1.1 allows exactly two lines; remove it", clip(lines[2]))}
	}
	return version, encoding, nil
}

// notInForm explains how line differs from "label: value" and gives the
// line to write instead: the value kept when it is one, else example.
func notInForm(line, label, form, example string, value *regexp.Regexp) string {
	l, v, _ := strings.Cut(line, ":")
	l, tv := strings.TrimSpace(l), strings.TrimSpace(v)
	want := label + ": " + example
	if strings.EqualFold(l, label) && value.MatchString(tv) {
		want = label + ": " + tv
	}
	var why string
	switch {
	case !strings.EqualFold(l, label):
		why = fmt.Sprintf("the line must be %q", label+": "+form)
	case l != label || !strings.HasPrefix(line, label+":"):
		why = fmt.Sprintf("the label must read %q exactly, with no space before the colon", label)
	case !value.MatchString(tv):
		why = fmt.Sprintf("the value must have the form %s", form)
	default:
		why = "one space must follow the colon, and nothing the value"
	}
	return fmt.Sprintf("%q is not in the exact form %q of RFC 8493 section 2.1.1 (%s); write %q",
		clip(line), label+": "+form, why, want)
}

func clip(s string) string {
	if len(s) > 80 {
		return s[:80] + "..."
	}
	return s
}
