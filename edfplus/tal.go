package edfplus

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Annotation is one text of a time-stamped annotation list (EDF+ 2.2.2).
type Annotation struct {
	// OnsetS is the onset in seconds from the file's start time, and
	// OnsetText its text as written ("+12.5"), kept so that no decimal
	// digit is lost.
	OnsetS    float64
	OnsetText string
	// DurationS is the duration in seconds; NaN when the TAL gives none.
	DurationS    float64
	DurationText string
	// Text is the annotation (UTF-8). One TAL with several texts gives one
	// Annotation each.
	Text string
}

// TALError is a malformed annotation list.
type TALError struct {
	Record int // 0-based data record
	Offset int64
	Msg    string
}

func (e *TALError) Error() string {
	return fmt.Sprintf("byte %d (data record %d, annotation signal): %s", e.Offset, e.Record, e.Msg)
}

// ParseTALs reads the TALs of one annotation signal's bytes in one data
// record. keeping is the onset of the record's time-keeping TAL (the first
// TAL, whose first text is empty, EDF+ 2.2.4), NaN when the bytes hold none.
// base is the offset of b in the file, for errors.
func ParseTALs(b []byte, record int, base int64) (anns []Annotation, keeping float64, keepingText string, err error) {
	keeping = math.NaN()
	i := 0
	first := true
	for i < len(b) && b[i] != 0 {
		start := i
		end := bytes.IndexByte(b[i:], 0)
		if end < 0 {
			return nil, keeping, "", &TALError{record, base + int64(i), "a TAL does not end with a 0 byte"}
		}
		tal := b[i : i+end]
		i += end + 1
		// Onset[\x15Duration]\x14 text \x14 text ... \x14
		k := bytes.IndexByte(tal, 20)
		if k < 0 {
			return nil, keeping, "", &TALError{record, base + int64(start), "a TAL without the 0x14 byte after its onset"}
		}
		head := string(tal[:k])
		onsetText, durText := head, ""
		if d := strings.IndexByte(head, 21); d >= 0 {
			onsetText, durText = head[:d], head[d+1:]
		}
		if !isOnset(onsetText) {
			return nil, keeping, "", &TALError{record, base + int64(start), fmt.Sprintf("onset %q is not '+' or '-' followed by seconds", onsetText)}
		}
		onset, _ := strconv.ParseFloat(onsetText, 64)
		dur := math.NaN()
		if durText != "" || strings.IndexByte(head, 21) >= 0 {
			if !isUnsignedDecimal(durText) {
				return nil, keeping, "", &TALError{record, base + int64(start), fmt.Sprintf("duration %q is not a number of seconds", durText)}
			}
			dur, _ = strconv.ParseFloat(durText, 64)
		}
		body := string(tal[k+1:])
		if !strings.HasSuffix(body, "\x14") {
			return nil, keeping, "", &TALError{record, base + int64(start), "a TAL's last annotation text does not end with 0x14"}
		}
		texts := strings.Split(strings.TrimSuffix(body, "\x14"), "\x14")
		for n, t := range texts {
			if !utf8.ValidString(t) {
				return nil, keeping, "", &TALError{record, base + int64(start), "an annotation text is not UTF-8"}
			}
			if first && n == 0 && t == "" {
				keeping, keepingText = onset, onsetText
				continue
			}
			if t == "" && n > 0 {
				continue
			}
			anns = append(anns, Annotation{OnsetS: onset, OnsetText: onsetText, DurationS: dur, DurationText: durText, Text: t})
		}
		first = false
	}
	for j := i; j < len(b); j++ {
		if b[j] != 0 {
			return nil, keeping, "", &TALError{record, base + int64(j), "bytes after the last TAL must be 0"}
		}
	}
	return anns, keeping, keepingText, nil
}

func isOnset(s string) bool {
	return len(s) >= 2 && (s[0] == '+' || s[0] == '-') && isUnsignedDecimal(s[1:])
}

func isUnsignedDecimal(s string) bool {
	if s == "" {
		return false
	}
	dot := false
	digits := 0
	for i := 0; i < len(s); i++ {
		switch c := s[i]; {
		case c >= '0' && c <= '9':
			digits++
		case c == '.' && !dot:
			dot = true
		default:
			return false
		}
	}
	return digits > 0
}

// FormatSeconds writes a TAL time: '+' or '-' and the shortest decimal that
// reads back as v (strconv's shortest round-trip form, no exponent).
func FormatSeconds(v float64) string {
	s := strconv.FormatFloat(math.Abs(v), 'f', -1, 64)
	if v < 0 {
		return "-" + s
	}
	return "+" + s
}

// AppendTAL appends one TAL holding texts at onset (with a duration when
// durationS is not NaN) to b, in the form of EDF+ 2.2.2.
func AppendTAL(b []byte, onsetS, durationS float64, texts ...string) []byte {
	b = append(b, FormatSeconds(onsetS)...)
	if !math.IsNaN(durationS) {
		b = append(b, 21)
		b = append(b, FormatSeconds(durationS)[1:]...)
	}
	b = append(b, 20)
	for _, t := range texts {
		b = append(b, t...)
		b = append(b, 20)
	}
	return append(b, 0)
}

// TimeKeepingTAL is the first TAL of a record's annotation signal: the
// record's onset and an empty text (EDF+ 2.2.4).
func TimeKeepingTAL(onsetS float64) []byte {
	return AppendTAL(nil, onsetS, math.NaN(), "")
}
