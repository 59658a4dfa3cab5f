package docload

import (
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"muarc/internal/reftest"
)

func TestFormatByExtension(t *testing.T) {
	for name, want := range map[string]string{"a.json": "json", "b.JSON": "json", "c.yaml": "yaml", "d.yml": "yaml"} {
		if got, err := Format(name); err != nil || got != want {
			t.Errorf("Format(%q) = %q, %v; want %q", name, got, err, want)
		}
	}
	for _, name := range []string{"profile", "p.txt", "p.toml"} {
		var e *Error
		if _, err := Format(name); !errors.As(err, &e) || !strings.Contains(e.Hint, "*.json") {
			t.Errorf("Format(%q) = %v; want a refusal naming the extensions", name, err)
		}
	}
}

type member struct {
	Name  string  `json:"name" yaml:"name"`
	Level float64 `json:"level" yaml:"level"`
}

// TestDecodeErrorsHavePlaces checks the place of each kind of error: the
// line and column numbers are those of the offending text, counted by hand
// from the documents below (1-based, as editors show them).
func TestDecodeErrorsHavePlaces(t *testing.T) {
	cases := []struct {
		file, text   string
		line, column int
		msg          string
	}{
		{"a.json", "{\n  \"name\": \"x\",\n  \"levle\": 3\n}\n", 3, 3, `unknown member "levle"`},
		{"a.json", "{\n  \"name\": \"x\",\n  \"level\": \"high\"\n}\n", 3, 18, "level: a string where float64 is expected"},
		{"a.json", "{\n  \"name\": \"x\"\n  \"level\": 3\n}\n", 3, 3, "not valid JSON"},
		{"a.yaml", "name: x\nlevle: 3\n", 2, 0, `unknown member "levle"`},
		{"a.yaml", "name: x\nlevel: high\n", 2, 0, "not valid YAML"},
		{"a.yaml", "name: x\n  level: 3\n", 2, 0, "not valid YAML"},
	}
	for _, c := range cases {
		var m member
		err := Decode(c.file, []byte(c.text), &m)
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%q: %v is not a docload.Error", c.text, err)
			continue
		}
		if e.Line != c.line || c.column != 0 && e.Column != c.column || !strings.Contains(e.Msg, c.msg) {
			t.Errorf("%q: got %d:%d %q, want %d:%d containing %q", c.text, e.Line, e.Column, e.Msg, c.line, c.column, c.msg)
		}
	}
}

// TestDeepNestingIsRefusedCheaply: a 80 KB document nested 40,000 deep is
// refused before decoding, allocating far less than 64 MiB.
func TestDeepNestingIsRefusedCheaply(t *testing.T) {
	for _, c := range []struct{ file, open, close string }{
		{"deep.json", "[", "]"}, {"deep.json", `{"a":`, "}"}, {"deep.yaml", "[", "]"}, {"deep.yaml", "{a: ", "}"},
	} {
		doc := []byte(strings.Repeat(c.open, 40000) + "1" + strings.Repeat(c.close, 40000))
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		_, _, err := Tree(c.file, doc)
		runtime.ReadMemStats(&after)
		var e *Error
		if !errors.As(err, &e) || !strings.Contains(e.Msg, "nested deeper than") {
			t.Errorf("%s %s...: %v; want a nesting refusal", c.file, c.open, err)
		}
		if got := after.TotalAlloc - before.TotalAlloc; got > 64<<20 {
			t.Errorf("%s %s...: allocated %d MiB", c.file, c.open, got>>20)
		}
	}
	// Block YAML nesting by indentation.
	var b strings.Builder
	for i := range 100 {
		fmt.Fprintf(&b, "%sk%d:\n", strings.Repeat(" ", i), i)
	}
	if _, _, err := Tree("deep.yaml", []byte(b.String())); err == nil || !strings.Contains(err.Error(), "nested deeper") {
		t.Errorf("100-level block YAML: %v; want a nesting refusal", err)
	}
}

func TestDuplicateKeysAreErrors(t *testing.T) {
	for file, doc := range map[string]string{"d.json": "{\"a\": 1,\n \"a\": 2}", "d.yaml": "a: 1\na: 2\n"} {
		_, _, err := Tree(file, []byte(doc))
		var e *Error
		if !errors.As(err, &e) || e.Line != 2 || !strings.Contains(e.Msg, "given twice") {
			t.Errorf("%s: %v; want line 2, key given twice", file, err)
		}
	}
}

// randomValue makes a random plain document value.
func randomValue(r *rand.Rand, depth int) any {
	k := r.IntN(7)
	if depth > 4 {
		k = r.IntN(4)
	}
	switch k {
	case 0:
		return r.Int64N(1<<40) - 1<<39
	case 1:
		return (r.Float64() - 0.5) * float64(r.IntN(1_000_000)+1) / 7
	case 2:
		return randomString(r)
	case 3:
		return r.IntN(2) == 0
	case 4:
		m := map[string]any{}
		for range r.IntN(5) {
			m[randomString(r)] = randomValue(r, depth+1)
		}
		return m
	default:
		var l []any
		for range r.IntN(5) {
			l = append(l, randomValue(r, depth+1))
		}
		if l == nil {
			l = []any{}
		}
		return l
	}
}

var alphabet = []string{"a", "b", "Z", " ", "é", "µ", "\"", "\\", "/", ":", "#", "-", "7", "\t", "ü", "x", "_"}

func randomString(r *rand.Rand) string {
	var b strings.Builder
	for range r.IntN(8) + 1 {
		b.WriteString(alphabet[r.IntN(len(alphabet))])
	}
	return b.String()
}

// TestTreeAgreesWithPython is a differential test: 2,000 random documents
// are written as JSON by Go, read by Python's json module (the reference),
// written again as YAML by PyYAML (Debian python3-yaml), and read back by
// Tree in both forms; Python then checks that all three readings are equal.
func TestTreeAgreesWithPython(t *testing.T) {
	py := reftest.NeedPython(t, "yaml")
	dir := t.TempDir()
	r := rand.New(rand.NewPCG(7, 11))
	const n = 2000
	for i := range n {
		doc := map[string]any{"doc": randomValue(r, 0)}
		var data []byte
		if i%2 == 0 {
			data, _ = json.Marshal(doc)
		} else {
			data, _ = json.MarshalIndent(doc, "", strings.Repeat(" ", 1+i%4))
		}
		os.WriteFile(filepath.Join(dir, fmt.Sprintf("%d.json", i)), data, 0o644)
	}
	toYAML := `
import json, sys, yaml, glob, os
for p in glob.glob(os.path.join(sys.argv[1], "*.json")):
    v = json.load(open(p, encoding="utf-8"))
    flow = int(os.path.basename(p).split(".")[0]) % 3 == 0
    open(p[:-5] + ".yaml", "w", encoding="utf-8").write(yaml.safe_dump(v, allow_unicode=True, default_flow_style=flow))
`
	if out, err := exec.Command(py, "-c", toYAML, dir).CombinedOutput(); err != nil {
		t.Fatalf("python: %v\n%s", err, out)
	}
	for i := range n {
		for _, ext := range []string{"json", "yaml"} {
			p := filepath.Join(dir, fmt.Sprintf("%d.%s", i, ext))
			data, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			v, _, err := Tree(p, data)
			if err != nil {
				t.Fatalf("%s: %v\n%s", p, err, data)
			}
			out, _ := json.Marshal(v)
			os.WriteFile(p+".go", out, 0o644)
		}
	}
	compare := `
import json, sys, glob, os
bad = 0
for p in sorted(glob.glob(os.path.join(sys.argv[1], "*.json"))):
    ref = json.load(open(p, encoding="utf-8"))
    for got in (p + ".go", p[:-5] + ".yaml.go"):
        if json.load(open(got, encoding="utf-8")) != ref:
            bad += 1
            if bad < 5: print("differs:", got)
print("cases", len(glob.glob(os.path.join(sys.argv[1], "*.json"))), "differ", bad)
`
	out, err := exec.Command(py, "-c", compare, dir).CombinedOutput()
	if err != nil || !strings.Contains(string(out), fmt.Sprintf("cases %d differ 0", n)) {
		t.Fatalf("python comparison: %v\n%s", err, out)
	}
}

// FuzzTree: no document makes Tree panic, and a document Tree accepts as
// JSON is one encoding/json accepts too.
func FuzzTree(f *testing.F) {
	for _, s := range []string{`{"a": [1, 2.5, "x", true, null]}`, "a: [1, {b: 2}]\nc: &x 3\nd: *x\n", "[[[[1]]]]", `{"a":1,"a":2}`, "\ufeff{}", "- - - 1\n"} {
		f.Add(s, true)
		f.Add(s, false)
	}
	f.Fuzz(func(t *testing.T, doc string, asJSON bool) {
		name := "f.yaml"
		if asJSON {
			name = "f.json"
		}
		v, _, err := Tree(name, []byte(doc))
		if err == nil && asJSON {
			var ref any
			if json.Unmarshal([]byte(strings.TrimPrefix(doc, "\ufeff")), &ref) != nil {
				t.Fatalf("Tree accepted JSON that encoding/json refuses: %q -> %v", doc, v)
			}
		}
	})
}
