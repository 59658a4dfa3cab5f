package convert

import (
	"math"
	"strconv"
	"unsafe"
)

// number is one decimal number as written in a text cell.
type number struct {
	v float64
	// digits is the count of significant digits written (leading zeros not
	// counted, trailing zeros counted: "0.0100" has 3). 0 for NaN, Inf and
	// zeros written without a non-zero digit.
	digits int
	// mant and exp10 give the written value as mant * 10^exp10 when
	// digits <= 19 (exact, before any rounding to binary).
	mant  uint64
	exp10 int
	// integer is true when the cell was written without a fraction or an
	// exponent ("12", "-3").
	integer bool
	// decimals is the number of digits written after the decimal point.
	decimals int
	// rng is not rangeOK when the cell is an infinity word or a number
	// float64 cannot hold (v is then ±Inf or ±0).
	rng rangeKind
}

// rangeKind says why a number cell does not hold a finite float64 of the
// value written.
type rangeKind uint8

const (
	rangeOK        rangeKind = iota
	rangeInfinite            // "inf", "-Infinity" written out
	rangeOverflow            // beyond ±1.8e308: reads as ±Inf
	rangeUnderflow           // non-zero but below 4.9e-324: reads as 0
)

// String says what is wrong with the cell, in words for messages.
func (r rangeKind) String() string {
	switch r {
	case rangeInfinite:
		return "an infinity"
	case rangeOverflow:
		return "beyond the largest float64 (it would be stored as infinity)"
	case rangeUnderflow:
		return "a non-zero number below the smallest float64 (it would be stored as 0)"
	}
	return "in range"
}

// hintOutOfRange is the hint given with a refused out-of-range cell.
const hintOutOfRange = "write a finite number (leave the cell empty when not known), or give --allow-out-of-range to store infinities and overflow as ±Inf and underflow as 0"

// cellKind tells what a cell held.
type cellKind uint8

const (
	cellNumber cellKind = iota
	cellEmpty           // nothing but blanks: NaN
	cellNaN             // NaN, NA, N/A written out: NaN
	cellText            // not a number
)

// pow10 holds the exact powers of ten a float64 represents (10^0..10^22).
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// pow10f32 holds the exact powers of ten a float32 represents (10^0..10^10).
var pow10f32 = [...]float32{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10}

// parseNumber reads a trimmed cell. comma says whether ',' is the decimal
// separator (and '.' is then refused). It never allocates on the fast path:
// decimals with at most 15 significant digits and an exponent within ±22 are
// converted by exact scaling (the "fast path" of Clinger, "How to read
// floating point numbers accurately", PLDI 1990, also used by the Go
// standard library); all others go to strconv.ParseFloat, which rounds
// correctly.
func parseNumber(b []byte, comma bool) (number, cellKind) {
	var n number
	if len(b) == 0 {
		return n, cellEmpty
	}
	i := 0
	neg := false
	switch b[0] {
	case '+':
		i++
	case '-':
		neg = true
		i++
	}
	sep := byte('.')
	if comma {
		sep = ','
	}
	var mant uint64
	digits := 0  // significant digits seen
	dropped := 0 // significant digits beyond 19 (not in mant)
	sawDigit := false
	sawSep := false
	exp := 0
	for ; i < len(b); i++ {
		c := b[i]
		if c >= '0' && c <= '9' {
			sawDigit = true
			if sawSep {
				n.decimals++
			}
			if c == '0' && digits == 0 {
				if sawSep {
					exp--
				}
				continue
			}
			digits++
			if digits <= 19 {
				mant = mant*10 + uint64(c-'0')
				if sawSep {
					exp--
				}
			} else {
				dropped++
				if !sawSep {
					exp++
				}
			}
			continue
		}
		if c == sep && !sawSep {
			sawSep = true
			continue
		}
		break
	}
	if !sawDigit {
		if f, ok := infValue(b); ok {
			n.v = f
			n.rng = rangeInfinite
			return n, cellNumber
		}
		return n, special(b)
	}
	n.integer = !sawSep
	if i < len(b) {
		if b[i] != 'e' && b[i] != 'E' {
			return n, cellText
		}
		n.integer = false
		i++
		eneg := false
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			eneg = b[i] == '-'
			i++
		}
		if i == len(b) {
			return n, cellText
		}
		e := 0
		for ; i < len(b); i++ {
			c := b[i]
			if c < '0' || c > '9' {
				return n, cellText
			}
			if e < 100000 {
				e = e*10 + int(c-'0')
			}
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	n.digits = digits
	n.mant = mant
	n.exp10 = exp
	if digits == 0 {
		n.v = 0
		if neg {
			n.v = math.Copysign(0, -1)
		}
		n.mant = 0
		return n, cellNumber
	}
	if dropped == 0 && mant < 1<<53 && exp >= -22 && exp <= 22 {
		f := float64(mant)
		if exp < 0 {
			f /= pow10[-exp]
		} else {
			f *= pow10[exp]
		}
		if neg {
			f = -f
		}
		n.v = f
		return n, cellNumber
	}
	n.v = slowParse(b, comma, 64)
	if math.IsInf(n.v, 0) {
		n.rng = rangeOverflow
	} else if n.v == 0 {
		n.rng = rangeUnderflow
	}
	return n, cellNumber
}

// slowParse converts a cell already known to be a valid number with
// strconv.ParseFloat (bits 32 or 64). A decimal comma is turned into a point
// in a stack copy first.
func slowParse(b []byte, comma bool, bits int) float64 {
	var buf [64]byte
	s := b
	if comma {
		if len(b) <= len(buf) {
			s = buf[:len(b)]
		} else {
			s = make([]byte, len(b))
		}
		for i, c := range b {
			if c == ',' {
				c = '.'
			}
			s[i] = c
		}
	}
	// The string aliases the byte slice only for the call; ParseFloat keeps
	// no reference on success and the error is discarded.
	f, err := strconv.ParseFloat(unsafe.String(unsafe.SliceData(s), len(s)), bits)
	if err != nil {
		// Only a range error is possible here: ParseFloat gives ±Inf or ±0,
		// which is the value written as far as any binary type goes.
		return f
	}
	return f
}

// special recognises the words labs write for a missing or infinite value.
func special(b []byte) cellKind {
	switch string(b) { // no allocation: the compiler compares in place
	case "NaN", "nan", "NAN", "NA", "N/A", "n/a", "na":
		return cellNaN
	}
	return cellText
}

// infValue returns ±Inf for a word, ok false when not one.
func infValue(b []byte) (float64, bool) {
	switch string(b) {
	case "inf", "Inf", "INF", "+inf", "+Inf", "Infinity", "+Infinity":
		return math.Inf(1), true
	case "-inf", "-Inf", "-INF", "-Infinity":
		return math.Inf(-1), true
	}
	return 0, false
}

// f32Exact reports whether the float32 nearest to the written number, when
// printed with the digits written, gives back the number written: the rule
// under which storing it as float32 loses nothing. Up to 6 significant digits
// always do so for normal float32 magnitudes (FLT_DIG = 6, ISO/IEC 9899
// 5.2.4.2.2); longer numbers are checked.
func f32Exact(n *number, f32 float32) bool {
	if n.digits == 0 {
		return true
	}
	a := math.Abs(n.v)
	if n.digits <= 6 && a >= 0x1p-126 && a <= math.MaxFloat32 {
		return true
	}
	if n.digits > 19 || math.IsInf(float64(f32), 0) {
		return false
	}
	if n.digits > 15 {
		// The float64 value itself is rounded: compare by printing.
		return printsBack(n, float64(f32), 32)
	}
	// |f32 - D| against half a unit of the last written digit, in float64;
	// a decision close to the edge is settled by printing (exact).
	half := 0.5 * math.Pow(10, float64(n.exp10))
	if math.Abs(float64(f32)) < math.Pow(10, float64(n.exp10+n.digits-1)) {
		// Below the written decade the digits get finer: print.
		return printsBack(n, float64(f32), 32)
	}
	d := math.Abs(float64(f32) - n.v)
	if d < half*0.999999 {
		return true
	}
	if d > half*1.000001 {
		return false
	}
	return printsBack(n, float64(f32), 32)
}

// f64Exact is f32Exact for float64 (DBL_DIG = 15, ISO/IEC 9899 5.2.4.2.2).
func f64Exact(n *number) bool {
	if n.digits <= 15 {
		return true
	}
	if n.digits > 19 {
		return false
	}
	return printsBack(n, n.v, 64)
}

// printsBack formats f with n.digits significant digits and compares the
// digits and exponent with the ones written.
func printsBack(n *number, f float64, bits int) bool {
	var buf [40]byte
	s := strconv.AppendFloat(buf[:0], math.Abs(f), 'e', n.digits-1, bits)
	var m uint64
	i := 0
	for ; i < len(s) && s[i] != 'e'; i++ {
		if s[i] >= '0' && s[i] <= '9' {
			m = m*10 + uint64(s[i]-'0')
		}
	}
	if i >= len(s) {
		return false
	}
	e, err := strconv.Atoi(string(s[i+1:]))
	if err != nil {
		return false
	}
	return m == n.mant && e-(n.digits-1) == n.exp10
}

// toF32 rounds a parsed number to the nearest float32. Converting the
// float64 value is exact rounding except when the float64 lies on or beside
// a float32 rounding midpoint (double rounding) or in float32's subnormal
// range; those few cells are parsed again at 32 bits.
func toF32(n *number, cell []byte, comma bool) float32 {
	if n.digits > 0 && n.digits <= 19 && n.mant < 1<<24 && n.exp10 >= -10 && n.exp10 <= 10 {
		f := float32(n.mant)
		if n.exp10 < 0 {
			f /= pow10f32[-n.exp10]
		} else {
			f *= pow10f32[n.exp10]
		}
		if n.v < 0 {
			f = -f
		}
		return f
	}
	v := n.v
	bits := math.Float64bits(v)
	low := bits & (1<<29 - 1)
	a := math.Abs(v)
	if (low >= 1<<28-1 && low <= 1<<28+1) || (a != 0 && a < 0x1p-125) {
		return float32(slowParse(cell, comma, 32))
	}
	return float32(v)
}
