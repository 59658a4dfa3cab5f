package convert

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"

	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
)

// The integer-counts round trip. A generator writes EMG text files the way
// an amplifier's export does: integer counts k of an LSB q (0.5, 0.1907,
// 0.0596 uV and others), plus an offset, printed with 0-6 decimals (more
// decimals than q has: exact multiples; fewer: rounded, so the cells are
// not multiples of q), negative values, comma, semicolon with a decimal
// comma, tab, CRLF. Some files get one cell that is not a plain decimal of
// the file's form. For every file:
//
//   - counts are stored exactly when every cell is a plain decimal with the
//     file's decimals (checked here with a regular expression, not with the
//     importer's reader), floats otherwise;
//   - text -> counts -> text: export writes every data cell back byte for
//     byte (the decimal separator is export's '.');
//   - the physical value muarc reads is strconv.ParseFloat of the cell, bit
//     for bit, and h5py, R's hdf5r and h5wasm, applying the scale with the
//     lines LAYOUT.md gives (extracted from it), get the same bits as
//     Python's own float() of the text (testdata below).
//
// COUNTS_CASES raises the number of files (default 60).

type countsCase struct {
	dir, path string
	cells     [][]string // [row][channel] as written
	comma     bool       // decimal comma
	canonical bool       // every cell a plain decimal of one form
	lsb       string
}

var plainDecimal = regexp.MustCompile(`^-?(0|[1-9][0-9]*)(\.[0-9]+)?$`)

func genCountsCase(dir string, i int) (countsCase, error) {
	rng := rand.New(rand.NewSource(int64(i) + 1))
	lsbs := []struct {
		units int64
		dec   int
	}{{5, 1}, {1907, 4}, {596, 4}, {1, 0}, {25, 2}, {1, 3}, {3, 0}, {125, 6}, {2, 1}}
	q := lsbs[rng.Intn(len(lsbs))]
	dec := rng.Intn(7)
	var offset int64
	if rng.Intn(3) == 0 {
		offset = rng.Int63n(2000000) - 1000000
	}
	kmax := []float64{100, 3000, 30000, 2e6}[rng.Intn(4)]
	ch := 1 + rng.Intn(5)
	rows := 50 + rng.Intn(200)
	delim, comma, eol := ",", false, "\n"
	switch rng.Intn(3) {
	case 1:
		delim, comma = ";", rng.Intn(2) == 0
	case 2:
		delim = "\t"
	}
	if rng.Intn(3) == 0 {
		eol = "\r\n"
	}
	c := countsCase{dir: dir, path: filepath.Join(dir, "emg.csv"), comma: comma,
		lsb: string((record.CountScale{Decimals: q.dec}).AppendUnits(nil, q.units))}
	pow := math.Pow(10, float64(q.dec))
	var b strings.Builder
	b.WriteString("time [s]")
	for k := 0; k < ch; k++ {
		fmt.Fprintf(&b, "%se%d [uV]", delim, k+1)
	}
	b.WriteString(eol)
	for r := 0; r < rows; r++ {
		row := make([]string, ch)
		for k := range row {
			n := math.Round(math.Sin(float64(r)*0.07+float64(k))*kmax*0.8 + rng.NormFloat64()*kmax*0.1)
			v := (float64(int64(n)*q.units) + float64(offset)) / pow
			row[k] = strconv.FormatFloat(v, 'f', dec, 64)
		}
		c.cells = append(c.cells, row)
	}
	if rng.Intn(4) == 0 {
		r, k := rng.Intn(rows), rng.Intn(ch)
		x, _ := strconv.ParseFloat(c.cells[r][k], 64)
		c.cells[r][k] = []string{strconv.FormatFloat(x, 'e', 3, 64), "+" + strings.TrimPrefix(c.cells[r][k], "-"),
			strconv.FormatFloat(x, 'f', dec+1, 64), "NaN", "", "0" + strings.TrimPrefix(c.cells[r][k], "-")}[rng.Intn(6)]
	}
	c.canonical = true
	for _, row := range c.cells {
		for _, cell := range row {
			neg0 := strings.Trim(cell, "-0.") == "" && strings.HasPrefix(cell, "-")
			decs := 0
			if i := strings.IndexByte(cell, '.'); i >= 0 {
				decs = len(cell) - i - 1
			}
			digits := len(strings.TrimLeft(strings.NewReplacer("-", "", ".", "").Replace(cell), "0"))
			if !plainDecimal.MatchString(cell) || neg0 || decs != dec || digits > 15 { // the generator writes at most 15
				c.canonical = false
			}
		}
	}
	for r, row := range c.cells {
		b.WriteString(strconv.FormatFloat(float64(r)/2048, 'f', 7, 64))
		for _, cell := range row {
			b.WriteString(delim)
			b.WriteString(c.written(cell))
		}
		b.WriteString(eol)
	}
	return c, os.WriteFile(c.path, []byte(c.text(b.String())), 0o644)
}

// written is a cell as the file holds it (decimal comma where chosen).
func (c countsCase) written(cell string) string {
	if c.comma {
		return strings.ReplaceAll(cell, ".", ",")
	}
	return cell
}

func (c countsCase) text(s string) string {
	if c.comma {
		// The time column too.
		var out []string
		for _, l := range strings.SplitAfter(s, "\n") {
			if strings.HasPrefix(l, "time") {
				out = append(out, l)
				continue
			}
			out = append(out, strings.ReplaceAll(l, ".", ","))
		}
		return strings.Join(out, "")
	}
	return s
}

// exportedCells reads the data cells of an exported EMG file.
func exportedCells(path string) ([][]string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var out [][]string
	sc := bufio.NewScanner(f)
	body := false
	for sc.Scan() {
		l := sc.Text()
		if !body {
			body = strings.HasPrefix(l, "time [s]")
			continue
		}
		out = append(out, strings.Split(l, ",")[1:])
	}
	return out, sc.Err()
}

func TestCountsRoundTrip(t *testing.T) {
	n := 60
	if v, err := strconv.Atoi(os.Getenv("COUNTS_CASES")); err == nil && v > 0 {
		n = v
	}
	root := t.TempDir()
	// Imports wait on fsync mostly: eight at a time.
	results := make([]struct {
		c       countsCase
		asCount bool
		err     error
	}, n)
	next := make(chan int, n)
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	var wg sync.WaitGroup
	for w := 0; w < 8; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				dir := filepath.Join(root, strconv.Itoa(i))
				os.MkdirAll(dir, 0o755)
				c, err := genCountsCase(dir, i)
				if err == nil {
					results[i].asCount, err = checkCountsCase(c, i)
				}
				results[i].c, results[i].err = c, err
			}
		}()
	}
	wg.Wait()
	var ints []countsCase
	counts, floats := 0, 0
	for _, r := range results {
		if r.err != nil {
			t.Fatal(r.err)
		}
		if r.asCount {
			counts++
			ints = append(ints, r.c)
		} else {
			floats++
		}
	}
	if counts < n/3 || floats < n/10 {
		t.Fatalf("generator: %d files as counts, %d as floats of %d (a property of our generator: both kinds are common)", counts, floats, n)
	}
	crossCheckReaders(t, ints)
}

// checkCountsCase imports one generated file and checks what was stored;
// asCount says it was stored as counts.
func checkCountsCase(c countsCase, i int) (asCount bool, err error) {
	dir := c.dir
	out := filepath.Join(dir, "rec.h5")
	rep, err := ImportRecording(Inputs{EMG: []string{c.path}}, out, recfile.WriteOptions{})
	if err != nil {
		return false, fmt.Errorf("case %d: %v", i, err)
	}
	fr := rep.Files[0]
	rec, err := recfile.ReadAll(out)
	if err != nil {
		return false, err
	}
	a := rec.Trials[0].Arrays[0]
	rows, ch := a.Samples.Shape()
	got := make([]float64, rows*ch)
	if err := a.Samples.ReadFloat64(0, got); err != nil {
		return false, err
	}
	if !c.canonical {
		if a.SampleType.IsInteger() || fr.Counts != nil {
			return false, fmt.Errorf("case %d: a cell is not a plain decimal of the file's form, yet stored as %s: %s", i, a.SampleType, fr.DTypeWhy)
		}
		// Floats as before: the float32 or float64 of the text.
		for r, row := range c.cells {
			for k, cell := range row {
				w, _ := strconv.ParseFloat(cell, 64)
				if cell == "" || cell == "NaN" {
					w = math.NaN()
				}
				g := got[r*ch+k]
				if a.SampleType == record.Float32 {
					w32, _ := strconv.ParseFloat(cell, 32)
					if cell == "" || cell == "NaN" {
						w32 = math.NaN()
					}
					w = float64(float32(w32))
				}
				if math.Float64bits(g) != math.Float64bits(w) && !(math.IsNaN(g) && math.IsNaN(w)) {
					return false, fmt.Errorf("case %d row %d channel %d: %q stored as %s reads %v, want %v", i, r, k, cell, a.SampleType, g, w)
				}
			}
		}
		return false, nil
	}
	if !a.SampleType.IsInteger() || fr.Counts == nil || fr.Counts.MaxTextDifference != 0 {
		return false, fmt.Errorf("case %d (LSB %s): every cell is a plain decimal, stored as %s: %s", i, c.lsb, a.SampleType, fr.DTypeWhy)
	}
	// The smallest type: the one below it cannot hold the span of
	// counts whatever the offset (2^8 and 2^16 values).
	lo, hi := a.SampleType.CountRange()
	span := fr.Counts.MaxCount - fr.Counts.MinCount + 1
	if fr.Counts.MinCount < lo || fr.Counts.MaxCount > hi || a.SampleType == record.Int16 && span <= 1<<8 || a.SampleType == record.Int32 && span <= 1<<16 {
		return false, fmt.Errorf("case %d: counts %d..%d stored as %s", i, fr.Counts.MinCount, fr.Counts.MaxCount, a.SampleType)
	}
	for r, row := range c.cells {
		for k, cell := range row {
			w, _ := strconv.ParseFloat(cell, 64)
			if math.Float64bits(got[r*ch+k]) != math.Float64bits(w) {
				return false, fmt.Errorf("case %d row %d channel %d: %q reads back as %v (counts of %v), strconv gives %v", i, r, k, cell, got[r*ch+k], a.Scale, w)
			}
		}
	}
	// text -> counts -> text.
	if _, err := Export(out, []string{"signals"}, ExportOptions{Dir: filepath.Join(dir, "x")}); err != nil {
		return false, err
	}
	back, err := exportedCells(filepath.Join(dir, "x", rec.Trials[0].Name, "emg_"+a.Name+".csv"))
	if err != nil {
		return false, err
	}
	if len(back) != len(c.cells) {
		return false, fmt.Errorf("case %d: export has %d rows, want %d", i, len(back), len(c.cells))
	}
	for r := range back {
		if strings.Join(back[r], ",") != strings.Join(c.cells[r], ",") {
			return false, fmt.Errorf("case %d row %d: export wrote %q, the file had %q", i, r, back[r], c.cells[r])
		}
	}
	return true, nil
}

// crossCheckReaders has h5py, R's hdf5r and h5wasm read the physical
// values with LAYOUT.md's own lines, and compares them bit for bit with
// Python's float() of the text (and strconv's, the same by IEEE 754).
func crossCheckReaders(t *testing.T, cases []countsCase) {
	var list strings.Builder
	for _, c := range cases {
		fmt.Fprintf(&list, "%s\t%s\t%s\n", filepath.Join(c.dir, "rec.h5"), c.path, c.dir)
	}
	listFile := filepath.Join(t.TempDir(), "list.tsv")
	os.WriteFile(listFile, []byte(list.String()), 0o644)
	want := func(c countsCase) []byte {
		var b bytes.Buffer
		for _, row := range c.cells {
			for _, cell := range row {
				w, _ := strconv.ParseFloat(cell, 64)
				binary.Write(&b, binary.LittleEndian, w)
			}
		}
		return b.Bytes()
	}
	check := func(who, suffix string) {
		for _, c := range cases {
			got, err := os.ReadFile(filepath.Join(c.dir, suffix))
			if err != nil {
				t.Fatalf("%s wrote nothing for %s: %v", who, c.path, err)
			}
			if !bytes.Equal(got, want(c)) {
				t.Fatalf("%s reads other values than the text's float64 for %s (LSB %s)", who, c.path, c.lsb)
			}
		}
	}
	py := reftest.NeedPython(t, "h5py", "numpy")
	pyPhysical := snippet(t, "```python\n", "def physical(s):", "\n\n")
	script := pyPhysical + `
import sys, numpy as np
for line in open(sys.argv[1]):
    h5, csv, out = line.rstrip("\n").split("\t")
    rows = [l.rstrip("\r\n") for l in open(csv, encoding="utf-8")][1:]
    sep = ";" if ";" in rows[0] else ("\t" if "\t" in rows[0] else ",")
    text = np.array([[float(c.replace(",", ".")) for c in r.split(sep)[1:]] for r in rows], dtype=np.float64)
    f = h5py.File(h5, "r")
    t = f["trials"][list(f["trials"])[0]]
    x = physical(t["arrays"][list(t["arrays"])[0]]["samples"])
    assert x.dtype == np.float64 and np.array_equal(x.view(np.uint64), text.view(np.uint64)), csv
    x.astype("<f8").tofile(out + "/h5py.bin")
`
	if out, err := exec.Command(py, "-c", "import h5py\n"+script, listFile).CombinedOutput(); err != nil {
		t.Fatalf("h5py with LAYOUT.md's physical(): %v\n%s", err, out)
	}
	check("h5py", "h5py.bin")

	rs := reftest.NeedR(t, "hdf5r")
	rPhysical := snippet(t, "```r\n", "physical <- function(s) {", "\n}\n")
	rScript := "library(hdf5r)\n" + rPhysical + `
args <- commandArgs(trailingOnly = TRUE)
for (line in readLines(args[1])) {
  p <- strsplit(line, "\t")[[1]]
  f <- H5File$new(p[1], mode = "r")
  t <- f[["trials"]][[names(f[["trials"]])[1]]]
  s <- t[["arrays"]][[names(t[["arrays"]])[1]]][["samples"]]
  x <- physical(s)
  con <- file(file.path(p[3], "r.bin"), "wb")
  writeBin(as.vector(x), con, size = 8, endian = "little")
  close(con)
  f$close_all()
}
`
	rFile := filepath.Join(t.TempDir(), "check.R")
	os.WriteFile(rFile, []byte(rScript), 0o644)
	if out, err := exec.Command(rs, rFile, listFile).CombinedOutput(); err != nil {
		t.Fatalf("R hdf5r with LAYOUT.md's physical(): %v\n%s", err, out)
	}
	check("R hdf5r", "r.bin")

	node := reftest.NeedTool(t, "node", "nodejs")
	mod := reftest.NeedFile(t, filepath.Join("..", "scripts", "h5wasm", "node_modules", "h5wasm", "dist", "node", "hdf5_hl.js"), "npm h5wasm (make test installs it into scripts/h5wasm)")
	abs, _ := filepath.Abs(mod)
	jsPhysical := snippet(t, "```js\n", "const physical = (s) => {", "\n};\n")
	js := "import h5wasm from " + strconv.Quote("file://"+abs) + ";\nimport fs from \"fs\";\nawait h5wasm.ready;\n" + jsPhysical + `
for (const line of fs.readFileSync(process.argv[2], "utf8").split("\n")) {
  if (!line) continue;
  const [h5, , out] = line.split("\t");
  const f = new h5wasm.File(h5, "r");
  const t = f.get("trials").get(f.get("trials").keys()[0]);
  const a = t.get("arrays").get(t.get("arrays").keys()[0]);
  const x = physical(a.get("samples"));
  fs.writeFileSync(out + "/h5wasm.bin", Buffer.from(x.buffer));
  f.close();
}
`
	jsFile := filepath.Join(t.TempDir(), "check.mjs")
	os.WriteFile(jsFile, []byte(js), 0o644)
	if out, err := exec.Command(node, jsFile, listFile).CombinedOutput(); err != nil {
		t.Fatalf("h5wasm with LAYOUT.md's physical(): %v\n%s", err, out)
	}
	check("h5wasm", "h5wasm.bin")
}

// snippet cuts a definition out of LAYOUT.md: from start (inside a fenced
// block opened by fence) through the first end after it.
func snippet(t *testing.T, fence, start, end string) string {
	md := schema.Layout
	for {
		i := strings.Index(md, fence)
		if i < 0 {
			t.Fatalf("LAYOUT.md has no %q in a %q block", start, fence)
		}
		md = md[i+len(fence):]
		j := strings.Index(md, "```")
		block := md[:j]
		md = md[j+3:]
		k := strings.Index(block, start)
		if k < 0 {
			continue
		}
		block = block[k:]
		e := strings.Index(block, end)
		if e < 0 {
			t.Fatalf("LAYOUT.md: %q does not end with %q", start, end)
		}
		return block[:e+len(end)]
	}
}
