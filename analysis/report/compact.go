package report

import (
	"math"
	"regexp"
	"strconv"
)

// Figures drawn by analysis/plot give every path coordinate in absolute
// points with five significant digits ("L123.45,456.78"). Inlined in the
// page, each path is rewritten with coordinates rounded to a tenth of a
// point (1/720 inch: a seventh of a pixel on a 96 dpi screen) and given
// relative to the point before ("l1.2-.3"), which makes the path data
// about half as long and draws the same. Rounding is of the absolute
// coordinates, so errors do not add up along a path.

// pathData finds the d attribute of a path element.
var pathData = regexp.MustCompile(` d="([^"]*)"`)

// compactSVG rewrites the path data of svg (see above); a path it does
// not understand is left as it is.
func compactSVG(svg []byte) []byte {
	return pathData.ReplaceAllFunc(svg, func(m []byte) []byte {
		d := m[4 : len(m)-1]
		c, ok := compactPath(d)
		if !ok {
			return m
		}
		out := make([]byte, 0, len(c)+5)
		out = append(out, ` d="`...)
		out = append(out, c...)
		return append(out, '"')
	})
}

// tenths is v in tenths, rounded half away from zero.
func tenths(v float64) int64 { return int64(math.Round(v * 10)) }

// appendTenths writes n tenths as a short decimal ("12.3", "-.5", "4"),
// with a comma before it unless it starts with a minus sign or first is
// true.
func appendTenths(b []byte, n int64, first bool) []byte {
	neg := n < 0
	if neg {
		n = -n
		b = append(b, '-')
	} else if !first {
		b = append(b, ',')
	}
	whole, frac := n/10, n%10
	if whole != 0 || frac == 0 {
		b = strconv.AppendInt(b, whole, 10)
	}
	if frac != 0 {
		b = append(b, '.', byte('0'+frac))
	}
	return b
}

// compactPath rewrites path data made of M, L, A and Z commands with
// absolute coordinates (as gonum/plot's SVG canvas writes them). ok is
// false for anything else.
func compactPath(d []byte) (out []byte, ok bool) {
	toks, ok := pathTokens(d)
	if !ok || len(toks) == 0 {
		return nil, false
	}
	out = make([]byte, 0, len(d)/2)
	var cx, cy, sx, sy int64 // current point and start of the subpath, tenths
	started := false
	for i := 0; i < len(toks); {
		cmd := toks[i].cmd
		if cmd == 0 {
			return nil, false
		}
		i++
		args := 0
		switch cmd {
		case 'M', 'L':
			args = 2
		case 'A':
			args = 7
		case 'Z':
			out = append(out, 'z')
			cx, cy = sx, sy
			continue
		default:
			return nil, false
		}
		if i+args > len(toks) {
			return nil, false
		}
		for k := i; k < i+args; k++ {
			if toks[k].cmd != 0 {
				return nil, false
			}
		}
		a := toks[i : i+args]
		i += args
		if i < len(toks) && toks[i].cmd == 0 {
			return nil, false // implicit repetition: not written by the canvas
		}
		x, y := tenths(a[args-2].num), tenths(a[args-1].num)
		switch {
		case !started:
			if cmd != 'M' {
				return nil, false
			}
			out = append(out, 'M')
			out = appendTenths(out, x, true)
			out = appendTenths(out, y, false)
			started = true
		case cmd == 'A':
			fl, sw := a[3].num, a[4].num
			if (fl != 0 && fl != 1) || (sw != 0 && sw != 1) {
				return nil, false
			}
			out = append(out, 'a')
			out = appendTenths(out, tenths(a[0].num), true)
			out = appendTenths(out, tenths(a[1].num), false)
			out = appendTenths(out, tenths(a[2].num), false)
			out = append(out, ' ', byte('0'+int(fl)), ' ', byte('0'+int(sw)), ' ')
			out = appendTenths(out, x-cx, true)
			out = appendTenths(out, y-cy, false)
		default:
			out = append(out, byte(cmd+'a'-'A'))
			out = appendTenths(out, x-cx, true)
			out = appendTenths(out, y-cy, false)
		}
		cx, cy = x, y
		if cmd == 'M' {
			sx, sy = x, y
		}
	}
	return out, true
}

// pathToken is a command letter (cmd != 0) or a number.
type pathToken struct {
	cmd byte
	num float64
}

// pathTokens splits path data into letters and numbers separated by
// commas or blanks; false on anything else.
func pathTokens(d []byte) ([]pathToken, bool) {
	var toks []pathToken
	for i := 0; i < len(d); {
		c := d[i]
		switch {
		case c == ' ' || c == ',' || c == '\n' || c == '\t':
			i++
		case c == 'M' || c == 'L' || c == 'A' || c == 'Z':
			toks = append(toks, pathToken{cmd: c})
			i++
		case c == '-' || c == '+' || c == '.' || (c >= '0' && c <= '9'):
			j := i + 1
			for j < len(d) && (d[j] == '.' || d[j] == 'e' || d[j] == 'E' || (d[j] >= '0' && d[j] <= '9') ||
				((d[j] == '-' || d[j] == '+') && (d[j-1] == 'e' || d[j-1] == 'E'))) {
				j++
			}
			v, err := strconv.ParseFloat(string(d[i:j]), 64)
			if err != nil || math.IsInf(v, 0) || math.IsNaN(v) || math.Abs(v) > 1e12 {
				return nil, false
			}
			toks = append(toks, pathToken{num: v})
			i = j
		default:
			return nil, false
		}
	}
	return toks, true
}
