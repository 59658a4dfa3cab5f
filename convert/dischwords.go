package convert

import (
	"fmt"
	"strings"
)

// Words of the discharge reader: header names that are evidence of a
// shape, and readings described in words and as options.

// unitWords are header names of a column of unit labels (lower case,
// without blanks, '_', '-', '.' and '#'). Common practice in exports.
var unitWords = map[string]bool{"unit": true, "units": true, "unitid": true, "id": true, "mu": true, "muid": true, "motorunit": true,
	"motorunitid": true, "unitnumber": true, "munumber": true, "unitlabel": true, "label": true, "name": true, "unitname": true, "mulabel": true,
	"neuron": true, "cell": true, "source": true, "cluster": true}

// timeWords are header names of a column of times (normalised as
// unitWords, digits taken off: "t1", "time_2", "discharge times").
var timeWords = map[string]bool{"t": true, "time": true, "times": true, "discharge": true, "discharges": true, "dischargetime": true,
	"dischargetimes": true, "spike": true, "spikes": true, "spiketime": true, "spiketimes": true, "firing": true, "firingtime": true,
	"firingtimes": true, "sample": true, "samples": true, "sampleindex": true, "timestamp": true, "timestamps": true, "ts": true, "index": true}

func normWord(h string, digits bool) string {
	l, _, _ := splitLabelUnit(h)
	var b strings.Builder
	for _, c := range strings.ToLower(l) {
		switch {
		case c == ' ' || c == '_' || c == '-' || c == '.' || c == '#':
		case !digits && c >= '0' && c <= '9':
		default:
			b.WriteRune(c)
		}
	}
	return b.String()
}

// numbery reports whether a header cell holds only digits, signs,
// separators and blanks: numbers, not a label.
func numbery(h string) bool {
	digit := false
	for _, c := range h {
		switch {
		case c >= '0' && c <= '9':
			digit = true
		case strings.ContainsRune(".,;+-eE \t", c):
		default:
			return false
		}
	}
	return digit
}

// headerEvidence rules out a reading whose header contradicts it, for the
// options being detected: a column named like "unit" holds labels, a
// lines header names a label column or time columns, and a column label is
// not a run of numbers.
func headerEvidence(hdr [][]byte, r reading, line int) *rfail {
	if r.opt.Header != "" && r.opt.Header != "auto" {
		return nil
	}
	no := func(col int, format string, args ...any) *rfail {
		return &rfail{line: line, col: col, msg: fmt.Sprintf(format, args...)}
	}
	switch r.shape {
	case ShapeLong:
		if r.opt.Shape == "" && !unitWords[normWord(string(hdr[0]), true)] {
			return no(1, "the header's first column %q does not name unit labels", hdr[0])
		}
	case ShapeLines:
		first := normWord(string(hdr[0]), true)
		if r.opt.Labels == "" {
			if unitWords[first] && !r.labels {
				return no(1, "the header names the first column %q, a column of unit labels", hdr[0])
			}
			if r.labels && !unitWords[first] {
				return no(1, "the header's first column %q does not name unit labels", hdr[0])
			}
		}
		for i, c := range hdr {
			if i == 0 && r.labels {
				continue
			}
			l, _, has := splitLabelUnit(string(c))
			if b, f := timeMark(string(c)); !timeWords[normWord(string(c), false)] && !(strings.TrimSpace(l) == "" && has && (b != "" || f >= 0)) {
				return no(i+1, "header cell %q does not name a column of times", c)
			}
		}
	case ShapeColumns, ShapeMatrix:
		for i, c := range hdr {
			if r.opt.Shape == "" && unitWords[normWord(string(c), true)] {
				return no(i+1, "a column headed %q holds unit labels, not one unit's times", c)
			}
			if l := stripTimeMark(string(c)); numbery(l) {
				if _, k := parseNumber([]byte(l), r.comma); k != cellNumber {
					f := no(i+1, "header cell %q is numbers, not a label", c)
					f.soft, f.weak = true, true
					return f
				}
			}
		}
	}
	return nil
}

// flags names the options that pick reading r, as command-line flags and
// as profile members.
func (r reading) flags(opt DischargeOptions) (cli, prof string) {
	var c, p []string
	add := func(flag, member, v string) {
		c = append(c, "--"+flag+" "+v)
		p = append(p, "discharges."+member+": "+v)
	}
	if opt.Delimiter == 0 && !r.colon {
		add("discharge-delimiter", "delimiter", DelimiterName(r.delim))
	}
	if opt.DecimalComma == "" || opt.DecimalComma == "auto" {
		add("discharge-decimal-comma", "decimal_comma", yesNo(r.comma))
	}
	if (opt.Header == "" || opt.Header == "auto") && !r.colon {
		add("discharge-header", "header", yesNo(r.header))
	}
	if opt.Shape == "" {
		add("shape", "shape", r.shape)
	}
	if opt.Labels == "" {
		add("labels", "labels", yesNo(r.labels))
	}
	if opt.TimeBase == "" && r.shape != ShapeMatrix {
		add("time-base", "time_base", r.base)
	}
	if opt.FirstIndex < 0 && r.base == "samples" && r.shape != ShapeMatrix {
		add("first-index", "first_index", fmt.Sprint(r.first))
	}
	return strings.Join(c, " "), strings.Join(p, ", ")
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

// describe says reading r in words.
func (r reading) describe() string {
	var parts []string
	switch r.shape {
	case ShapeLines:
		if r.colon {
			parts = append(parts, "one line per unit, \"label: times\"")
		} else if r.labels {
			parts = append(parts, "one line per unit, its label first")
		} else {
			parts = append(parts, "one line per unit, times only (units numbered in file order)")
		}
	case ShapeColumns:
		if r.header {
			parts = append(parts, "one column per unit, labels in the header")
		} else {
			parts = append(parts, "one column per unit, no header (units numbered in file order)")
		}
	case ShapeLong:
		parts = append(parts, "a long table of unit label and time")
	case ShapeMatrix:
		parts = append(parts, "a 0/1 pulse-train matrix, one row per sample")
	}
	if r.header && r.shape != ShapeColumns {
		parts = append(parts, "a header line")
	}
	if r.shape != ShapeMatrix {
		switch r.base {
		case "samples":
			parts = append(parts, fmt.Sprintf("times as %d-based sample indices", r.first))
		default:
			parts = append(parts, "times in "+r.base)
		}
	}
	if !r.colon {
		parts = append(parts, DelimiterName(r.delim)+"-delimited")
	}
	if r.comma {
		parts = append(parts, "decimal comma")
	}
	return strings.Join(parts, ", ")
}
