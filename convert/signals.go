package convert

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"strings"

	"muarc/record"
)

// SignalOptions control reading a delimited signal file (force or EMG).
type SignalOptions struct {
	TextOptions
	// TimeColumn is "" or "auto" (the first column when its header names
	// time or a sample number), "none", "first", or a column label.
	TimeColumn string
	// TimeUnit overrides the time column's unit: "s", "ms" or "samples".
	TimeUnit string
	// RateHz is the sampling rate in hertz when the file has no time column
	// (or a sample-number column); 0 = not given.
	RateHz float64
	// AllowGaps accepts missing samples in the time column; they become
	// rows of NaN so that sample indices stay on one grid.
	AllowGaps bool
	// DType forces the stored sample type; "" decides by the digits written.
	DType record.SampleType
	// Unit is the unit of columns whose header gives none ("" = unknown).
	Unit string
	// Skip lists column labels that are read and checked but not kept
	// (a trigger or auxiliary column); the report names them.
	Skip []string
	// Rename maps column labels to the channel labels to store.
	Rename map[string]string
	// AllowOutOfRange stores infinity words ("inf", "-Infinity") and
	// numbers beyond float64 as ±Inf and non-zero numbers below it as 0;
	// without it such a cell is refused with its position.
	AllowOutOfRange bool
	// DefaultRateHz and DefaultStartS come from the metadata sidecar: the
	// rate used when neither RateHz, a preamble line nor a time column
	// gives one, and the start time of a file without a time column or a
	// start line (NaN or 0 = not given).
	DefaultRateHz float64
	DefaultStartS float64
}

// Gap is a run of missing samples found in a time column.
type Gap struct {
	// Row is the grid row (0-based) of the first missing sample.
	Row int64 `json:"row"`
	// Missing is the number of samples missing.
	Missing int64 `json:"missing"`
	// Line is the file line of the sample after the gap.
	Line int `json:"line"`
}

// Signals describes a delimited signal file after the first pass: its
// dialect, columns, rate and the sample type that keeps it lossless. Its
// data is read by a second, streaming pass (Source or Columns).
type Signals struct {
	File    string
	Dialect Dialect
	// Meta holds the "key: value" lines above the table.
	Meta []MetaLine
	// Labels and Units describe the data columns (the time column is not one
	// of them); Units are UCUM ("" unknown).
	Labels []string
	Units  []string
	// TimeLabel is the time column's header ("" when none), TimeUnit "s",
	// "ms" or "samples".
	TimeLabel string
	TimeUnit  string
	// Rows is the number of table rows; Samples the number on the sample
	// grid (Rows plus the samples missing in gaps).
	Rows    int
	Samples int
	// RateHz is the sampling rate in hertz, StartS the time of the first
	// sample in seconds; RateWhy says where the rate came from.
	RateHz  float64
	StartS  float64
	RateWhy string
	Gaps    []Gap
	// JitterS is the largest distance in seconds between a time cell and
	// its place on the sample grid; known after a full second pass.
	JitterS float64
	// TimeResolutionS is the step of the last written digit of the time
	// column in seconds.
	TimeResolutionS float64
	// DType is the stored sample type and DTypeWhy the reason.
	DType    record.SampleType
	DTypeWhy string
	// Scale is the count scale when DType is an integer type: the data
	// cells are counts of a quantum (see quantum.go).
	Scale record.CountScale
	// MaxDigits is the most significant digits written in a data cell.
	MaxDigits int
	// LossyCells counts cells the chosen type does not hold at the digits
	// written; MaxAbsError is the largest error that causes (in the
	// column's unit).
	LossyCells  int64
	MaxAbsError float64
	// NaNCells counts empty or NaN data cells.
	NaNCells int64
	// Notes says what was assumed and why.
	Notes []string

	lay        *layout
	allowRange bool
	// detectedUnit is the unit of a headerless time column decided by
	// headerlessTime.
	detectedUnit string
	cols         int
	tcol         int
	skip         []bool

	forced             record.SampleType
	quantum            quantumStats
	countsWhyNot       string
	lossy32, lossy64   int64
	maxErr32, maxErr64 float64
	first32, first64   cellRef
}

var timeLabels = map[string]string{
	"time": "s", "t": "s", "timestamp": "s", "seconds": "s", "sec": "s", "time_s": "s", "time s": "s",
	"time_ms": "ms", "time ms": "ms", "milliseconds": "ms",
	"sample": "samples", "samples": "samples", "sample #": "samples", "sample_number": "samples",
	"sample number": "samples", "sample index": "samples", "sample_index": "samples", "n": "samples", "index": "samples", "#": "samples",
}

// ScanSignals runs the first pass over a signal file: dialect, header,
// units, time column (constant step, gaps, rate), row count and the sample
// type decision. It reads the whole file once and keeps nothing of it.
func ScanSignals(path string, opt SignalOptions) (*Signals, error) {
	lay, err := readLayout(path, opt.TextOptions)
	if err != nil {
		return nil, err
	}
	s := &Signals{File: path, Dialect: lay.dialect, Meta: lay.meta, lay: lay, cols: lay.fields, tcol: -1, allowRange: opt.AllowOutOfRange}
	if err := s.commaOrDecimalComma(opt); err != nil {
		return nil, err
	}
	s.Notes = append(s.Notes, lay.dialect.Why)
	if lay.bom {
		s.Notes = append(s.Notes, "UTF-8 byte order mark skipped")
	}
	if err := s.columns(opt); err != nil {
		return nil, err
	}
	if err := s.firstPass(opt); err != nil {
		return nil, err
	}
	return s, nil
}

func (s *Signals) columns(opt SignalOptions) error {
	lay := s.lay
	defUnit, err := NormalizeUnit(opt.Unit)
	if err != nil {
		return perr(s.File, 0, 0, "give a UCUM unit such as uV, mV or N", "%v", err)
	}
	if mu := metaValue(s.Meta, "unit", "units"); mu != "" && defUnit == "" {
		if defUnit, err = NormalizeUnit(mu); err != nil {
			return perr(s.File, metaLineOf(s.Meta, "unit", "units"), 0, "give a UCUM unit such as uV, mV or N", "%v", err)
		}
	}
	labels := make([]string, s.cols)
	units := make([]string, s.cols)
	given := make([]bool, s.cols)
	for i := range labels {
		labels[i] = fmt.Sprintf("col%d", i+1)
		units[i] = defUnit
	}
	if lay.header != nil {
		for i, h := range lay.header {
			l, u, has := splitLabelUnit(h)
			labels[i] = l
			if has {
				nu, err := NormalizeUnit(u)
				if err != nil {
					return perr(s.File, lay.headerLine, i+1, "write the unit in UCUM (uV, mV, V, N, N.m, %, s, ms) in brackets after the label", "%v", err)
				}
				units[i] = nu
				given[i] = true
			}
			if l == "" {
				labels[i] = fmt.Sprintf("col%d", i+1)
			}
		}
	}
	// The time column.
	tc := strings.ToLower(strings.TrimSpace(opt.TimeColumn))
	switch tc {
	case "none":
	case "first":
		s.tcol = 0
	case "", "auto":
		if lay.header == nil && s.cols >= 2 {
			if err := s.headerlessTime(opt); err != nil {
				return err
			}
		}
		if lay.header != nil {
			if _, ok := timeLabels[strings.ToLower(labels[0])]; ok {
				s.tcol = 0
			} else if given[0] && (units[0] == "s" || units[0] == "ms") {
				s.tcol = 0 // "Zeit [ms]": a first column in seconds or milliseconds
			}
		}
	default:
		for i, l := range labels {
			if strings.EqualFold(l, opt.TimeColumn) {
				s.tcol = i
			}
		}
		if s.tcol < 0 {
			return perr(s.File, lay.headerLine, 0, "give a label of the header", "no column %q for --time-column", opt.TimeColumn)
		}
	}
	if s.tcol >= 0 {
		s.TimeLabel = labels[s.tcol]
		unit := units[s.tcol]
		why := "from the header"
		if opt.TimeUnit != "" {
			unit, why = opt.TimeUnit, "as given"
		} else if !given[s.tcol] {
			unit = timeLabels[strings.ToLower(labels[s.tcol])]
			why = "from the label " + strconv.Quote(labels[s.tcol])
			if unit == "" {
				var err error
				if unit, why, err = s.timeUnitFromRate(opt); err != nil {
					return err
				}
			}
		}
		switch unit {
		case "s", "ms", "samples":
		default:
			return perr(s.File, lay.headerLine, s.tcol+1, "give the time in s or ms, or sample numbers (--time-unit)", "time unit %q not usable", unit)
		}
		s.TimeUnit = unit
		s.Notes = append(s.Notes, fmt.Sprintf("time column %q in %s (%s)", s.TimeLabel, unit, why))
	}
	for _, k := range opt.Skip {
		found := false
		for i, l := range labels {
			if l == k && i != s.tcol {
				if s.skip == nil {
					s.skip = make([]bool, s.cols)
				}
				s.skip[i], found = true, true
				s.Notes = append(s.Notes, fmt.Sprintf("column %q not imported (skipped as the profile says)", l))
			}
		}
		if !found {
			return perr(s.File, lay.headerLine, 0, "name a column of the header in emg.skip", "no column %q to skip", k)
		}
	}
	for i := range labels {
		if i == s.tcol || s.skip != nil && s.skip[i] {
			continue
		}
		l := labels[i]
		if r, ok := opt.Rename[l]; ok && r != "" {
			s.Notes = append(s.Notes, fmt.Sprintf("column %q stored as channel %q", l, r))
			l = r
		}
		s.Labels = append(s.Labels, l)
		s.Units = append(s.Units, units[i])
	}
	if len(s.Labels) == 0 {
		return perr(s.File, lay.firstRowLine, 0, "the file needs at least one data column besides the time", "no data columns")
	}
	return nil
}

func (s *Signals) spec(mode blockMode, all32 bool) *blockSpec {
	return &blockSpec{file: s.File, d: s.Dialect, cols: s.cols, tcol: s.tcol, mode: mode, all32: all32, skip: s.skip, allowRange: s.allowRange,
		quantum: mode == modeCount && s.forced == "", scale: s.Scale}
}

func (s *Signals) firstPass(opt SignalOptions) error {
	rate, rateWhy := opt.RateHz, "as given"
	if rate < 0 || math.IsNaN(rate) || math.IsInf(rate, 0) {
		return perr(s.File, 0, 0, "give --rate as a finite positive number of hertz", "--rate %g is not a usable sampling rate", rate)
	}
	if rate == 0 {
		v, line, err := metaRate(s.File, s.Meta)
		if err != nil {
			return err
		}
		if line > 0 {
			rate, rateWhy = v, fmt.Sprintf("from the line %q above the table (line %d)", metaKeyOf(s.Meta, line)+": "+metaValue(s.Meta, rateKeys...), line)
		}
	}
	startLine, startAt, err := metaStart(s.File, s.Meta)
	if err != nil {
		return err
	}
	defRate := opt.DefaultRateHz
	if !(defRate > 0) || math.IsInf(defRate, 0) {
		defRate = 0
	}
	timed := s.TimeUnit == "s" || s.TimeUnit == "ms"
	if rate == 0 && defRate > 0 && !timed {
		rate, rateWhy = defRate, "from the metadata (sampling_rate_hz)"
	}
	tt := &timeTrack{file: s.File, col: s.tcol, allow: opt.AllowGaps}
	if s.TimeUnit == "samples" {
		tt.nominal = 1
	} else if rate > 0 && s.TimeUnit != "" {
		tt.nominal = 1 / rate
		if s.TimeUnit == "ms" {
			tt.nominal = 1000 / rate
		}
	}
	s.forced = opt.DType
	p := startPipeline(s.spec(modeCount, false), s.lay.bodyOffset, s.lay.bodyLine)
	defer p.close()
	var timeDec int
	timeFrac := false
	err = p.each(func(b *block) error {
		s.Rows += b.rows
		s.quantum.merge(&b.q)
		timeDec = max(timeDec, b.timeDec)
		timeFrac = timeFrac || b.timeFrac
		for i, t := range b.times {
			if err := tt.add(t, b.line+int(b.rowLines[i])); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if s.Rows == 0 {
		return perr(s.File, s.lay.bodyLine, 0, "the file needs at least one row of numbers under the header", "no data rows")
	}
	s.Gaps = tt.gaps
	s.Samples = s.Rows
	for _, g := range tt.gaps {
		s.Samples += int(g.Missing)
	}
	if len(s.Gaps) > 0 {
		s.Notes = append(s.Notes, fmt.Sprintf("%d gaps in the time column (%d samples) filled with NaN (--allow-gaps)", len(s.Gaps), s.Samples-s.Rows))
	}
	// Rate and start.
	scale := 1.0
	switch s.TimeUnit {
	case "ms":
		scale = 1e-3
	}
	res := math.Pow(10, -float64(timeDec))
	s.TimeResolutionS = res * scale
	switch {
	case s.TimeUnit == "samples":
		if timeFrac {
			return perr(s.File, s.lay.firstRowLine, s.tcol+1, "a sample-number column holds whole numbers", "sample-number column has fractions")
		}
		if rate == 0 {
			return perr(s.File, s.lay.headerLine, s.tcol+1, "give --rate in Hz (a sample-number column gives no rate)", "sampling rate not known")
		}
		s.StartS = 0
		if startAt > 0 {
			s.StartS = startLine
			s.Notes = append(s.Notes, fmt.Sprintf("sample-number column starts at %g; that sample is at %g s (start line %d)", tt.t0, startLine, startAt))
		} else {
			s.Notes = append(s.Notes, fmt.Sprintf("sample-number column starts at %g; that sample is taken as time 0 s", tt.t0))
		}
		s.TimeResolutionS = 1 / rate
	case s.TimeUnit != "":
		s.StartS = tt.t0 * scale
		if s.Rows < 2 {
			if rate == 0 && defRate > 0 {
				rate, rateWhy = defRate, "from the metadata (sampling_rate_hz)"
			}
			if rate == 0 {
				return perr(s.File, s.lay.firstRowLine, s.tcol+1, "give --rate in Hz", "one row only: the time column gives no rate")
			}
			break
		}
		step := tt.slope() * scale
		if rate == 0 && defRate > 0 && tt.hull.fits(1/(defRate*scale), res) {
			rate, rateWhy = defRate, fmt.Sprintf("from the metadata (sampling_rate_hz); each of the %d rows of the time column lies within half a written digit of its grid", s.Rows)
		} else if rate == 0 && defRate > 0 {
			return perr(s.File, s.lay.firstRowLine, s.tcol+1, "fix sampling_rate_hz in the metadata or the time column", "the metadata says %g Hz but the rows of the time column do not lie within half a written digit of that grid (they step %.9g s on average)", defRate, step)
		} else if rate == 0 {
			r, why, err := tt.fitRate(scale, res, s.Rows)
			if err != nil {
				return perr(s.File, s.lay.firstRowLine, s.tcol+1, rateChoices(err), "%v", err)
			}
			rate, rateWhy = r, why
		} else {
			// A rate given must agree with the time column to within half a
			// step over the whole file.
			drift := math.Abs(step-1/rate) * float64(s.Samples-1)
			if drift > 0.5/rate+s.TimeResolutionS {
				return perr(s.File, s.lay.firstRowLine, s.tcol+1, "fix the rate given or the time column", "time column steps %.9g s (%.6g Hz) but the rate is %g Hz (%s)", step, 1/step, rate, rateWhy)
			}
		}
	default:
		if rate == 0 {
			return perr(s.File, s.lay.headerLine, 0, "give --rate in Hz, a time column, or a \"sampling rate: ... Hz\" line above the table", "sampling rate not known")
		}
		s.StartS = 0
		switch {
		case startAt > 0:
			s.StartS = startLine
			s.Notes = append(s.Notes, fmt.Sprintf("first sample at %g s (start line %d)", startLine, startAt))
		case opt.DefaultStartS != 0 && !math.IsNaN(opt.DefaultStartS):
			s.StartS = opt.DefaultStartS
			s.Notes = append(s.Notes, fmt.Sprintf("first sample at %g s (start_s in the metadata)", s.StartS))
		default:
			s.Notes = append(s.Notes, "no time column: first sample taken as time 0 s")
		}
	}
	if timed && startAt > 0 && math.Abs(startLine-s.StartS) > 0.5/rate {
		return perr(s.File, startAt, 0, "fix the start line or the time column", "the start line says %g s but the time column starts at %g s", startLine, s.StartS)
	}
	s.RateHz, s.RateWhy = rate, rateWhy
	s.Notes = append(s.Notes, fmt.Sprintf("sampling rate %g Hz %s", rate, rateWhy))
	switch s.forced {
	case "":
		s.DType, s.DTypeWhy = record.Float32, "float32 unless a cell needs more digits (decided in the second pass; Decide checks first)"
		s.decideCounts()
	default:
		s.decideType(s.forced)
	}
	return nil
}

// mergeStats adds a parsed block's cell statistics.
func (s *Signals) mergeStats(b *block) {
	s.NaNCells += b.nan
	nd := 0
	for x := b.maxMant; x != 0; x /= 10 {
		nd++
	}
	s.MaxDigits = max(s.MaxDigits, b.maxDigits, nd)
	if b.f32bad > 0 && s.lossy32 == 0 {
		s.first32 = b.f32First
	}
	s.lossy32 += b.f32bad
	s.maxErr32 = math.Max(s.maxErr32, b.f32MaxErr)
	if b.f64bad > 0 && s.lossy64 == 0 {
		s.first64 = b.f64First
	}
	s.lossy64 += b.f64bad
	s.maxErr64 = math.Max(s.maxErr64, b.f64MaxErr)
}

func (s *Signals) resetStats() {
	s.NaNCells, s.MaxDigits = 0, 0
	s.lossy32, s.lossy64, s.maxErr32, s.maxErr64 = 0, 0, 0, 0
	s.first32, s.first64 = cellRef{}, cellRef{}
	s.LossyCells, s.MaxAbsError = 0, 0
}

// Decide reads every cell once (a full check: field counts, numbers) and
// decides the sample type before any writing: float32 when every cell reads
// back from float32 at the digits written, else float64 (or the type
// forced). The importer skips it and decides while writing instead,
// rewriting an array as float64 when a cell needs it.
func (s *Signals) Decide() error {
	s.resetStats()
	p := startPipeline(s.spec(modeScan, s.forced == record.Float32), s.lay.bodyOffset, s.lay.bodyLine)
	defer p.close()
	rows := 0
	err := p.each(func(b *block) error {
		rows += b.rows
		s.mergeStats(b)
		return nil
	})
	if err != nil {
		return err
	}
	if rows != s.Rows {
		return fmt.Errorf("%s: %d rows, %d in the first pass (did it change while it was read?)", s.File, rows, s.Rows)
	}
	s.decideType(s.forced)
	return nil
}

func (s *Signals) decideType(forced record.SampleType) {
	if s.DType.IsInteger() {
		return // counts, decided in the first pass
	}
	defer func() {
		if s.countsWhyNot != "" {
			s.DTypeWhy += "; not stored as integer counts: " + s.countsWhyNot
		}
	}()
	switch forced {
	case record.Float32:
		s.DType = record.Float32
		if s.lossy32 > 0 {
			s.LossyCells, s.MaxAbsError = s.lossy32, s.maxErr32
			s.DTypeWhy = fmt.Sprintf("float32 as forced: %d cells lose digits (first at line %d, column %d: %q); the largest error is %.3g", s.lossy32, s.first32.Line, s.first32.Column, s.first32.Text, s.maxErr32)
		} else {
			s.DTypeWhy = "float32 as forced; every cell fits it at the digits written"
		}
	case record.Float64:
		s.DType = record.Float64
		s.DTypeWhy = "float64 as forced"
	default:
		if s.lossy32 == 0 {
			s.DType = record.Float32
			s.DTypeWhy = fmt.Sprintf("float32: every cell reads back from float32 at the digits written (at most %d significant digits)", s.MaxDigits)
		} else {
			s.DType = record.Float64
			s.DTypeWhy = fmt.Sprintf("float64: float32 would not hold the digits written (first at line %d, column %d: %q)", s.first32.Line, s.first32.Column, s.first32.Text)
		}
	}
	if s.DType == record.Float64 && s.lossy64 > 0 {
		s.LossyCells, s.MaxAbsError = s.lossy64, s.maxErr64
		s.DTypeWhy += fmt.Sprintf("; %d cells have more digits than float64 holds (first at line %d, column %d), largest error about %.3g", s.lossy64, s.first64.Line, s.first64.Column, s.maxErr64)
	}
}

// commaOrDecimalComma refuses a headerless file whose every line is "a,b"
// with digits on both sides and no point: two whole-number columns split
// at the comma, or one column of numbers with a decimal comma ("-14,5").
// The two readings store different values; detection does not pick one.
func (s *Signals) commaOrDecimalComma(opt SignalOptions) error {
	if !s.Dialect.Detected || s.Dialect.Delimiter != ',' || s.lay.header != nil || opt.DecimalComma != "" && opt.DecimalComma != "auto" {
		return nil
	}
	rows, _, err := headRows(s.lay, 64)
	if err != nil || len(rows) == 0 {
		return nil
	}
	whole := func(b []byte, sign bool) bool {
		i := 0
		if sign && len(b) > 0 && (b[0] == '-' || b[0] == '+') {
			i++
		}
		j := i
		for j < len(b) && isDigit(b[j]) {
			j++
		}
		if j == i {
			return false
		}
		if j < len(b) && (b[j] == 'e' || b[j] == 'E') {
			_, k := parseNumber(b[j+1:], false)
			return !sign && k == cellNumber && bytes.IndexByte(b[j+1:], '.') < 0
		}
		return j == len(b)
	}
	for _, r := range rows {
		if len(r.cells) != 2 || !whole(r.cells[0], true) || !whole(r.cells[1], false) {
			return nil
		}
	}
	return perr(s.File, rows[0].line, 0, "give --delimiter comma (two columns) or --delimiter whitespace --decimal-comma yes (one column), or a header line",
		"every line reads as two whole-number columns split at ',' or as one column with a decimal comma (%q)", string(rows[0].cells[0])+","+string(rows[0].cells[1]))
}
