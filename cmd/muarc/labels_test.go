package main

import (
	"crypto/sha256"
	"encoding/json"
	"fmt"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"muarc/recfile"
	"muarc/synth"
)

// labelledStudy writes two subjects of the small generated study in which
// every unit of the edited decompositions carries a lab label that is not
// its id ("MU-<id+100>"), and returns the folder.
func labelledStudy(t *testing.T) string {
	t.Helper()
	cfg := synth.TestConfig()
	cfg.Subjects = 2
	cfg.MUAPs = false
	gens, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for i, g := range gens {
		for ti := range g.Recording.Trials {
			for ai := range g.Recording.Trials[ti].Arrays {
				for di := range g.Recording.Trials[ti].Arrays[ai].Decompositions {
					d := &g.Recording.Trials[ti].Arrays[ai].Decompositions[di]
					for ui := range d.Units {
						d.Units[ui].Label = ""
						if d.EditedByHand {
							d.Units[ui].Label = fmt.Sprintf("MU-%d", d.Units[ui].ID+100)
						}
					}
				}
			}
		}
		if err := recfile.Write(filepath.Join(dir, fmt.Sprintf("s%d.h5", i+1)), g.Recording, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

// The lab's labels name units in stats' tidy output, inspect and compare;
// muarc's id stands in where a unit has none.
func TestUnitLabelsEverywhere(t *testing.T) {
	dir := labelledStudy(t)
	f := filepath.Join(dir, "s1.h5")
	out, errs, code := runMuarc(t, dir, "stats", "--tsv", "--no-muaps", f)
	if code != 0 {
		t.Fatalf("stats: %d %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	head := strings.Split(lines[0], "\t")
	if head[3] != "unit" || head[4] != "label" {
		t.Fatalf("header %v", head)
	}
	labelled, bare := 0, 0
	for _, l := range lines[1:] {
		c := strings.Split(l, "\t")
		switch {
		case c[2] == "edited" && c[4] == "MU-"+fmt.Sprint(atoi(t, c[3])+100):
			labelled++
		case c[2] != "edited" && c[4] == "":
			bare++
		default:
			t.Errorf("row %v", c)
		}
	}
	if labelled == 0 || bare == 0 {
		t.Errorf("%d labelled and %d unlabelled rows", labelled, bare)
	}
	out, _, code = runMuarc(t, dir, "inspect", f)
	if code != 0 || !strings.Contains(out, "/edited: MU-") {
		t.Errorf("inspect does not list the labels:\n%s", out)
	}
	out, errs, code = runMuarc(t, dir, "compare", f+"#"+"ramp_20pct/ta_grid/auto", "#ramp_20pct/ta_grid/edited")
	if code != 0 {
		// The generated trial names follow the levels; find them.
		t.Fatalf("compare: %d %s", code, errs)
	}
	if !strings.Contains(out, "MU-10") {
		t.Errorf("compare does not name B's units by label:\n%s", out)
	}
}

func atoi(t *testing.T, s string) int {
	var v int
	if _, err := fmt.Sscan(s, &v); err != nil {
		t.Fatal(err)
	}
	return v
}

// stats DIR --write puts the tables, the figures and the JSON that lists
// them in the results folder; the recordings are not touched.
func TestStudyStatsWritesFigures(t *testing.T) {
	dir := labelledStudy(t)
	before := sums(t, dir)
	res := filepath.Join(t.TempDir(), "results")
	_, errs, code := runMuarc(t, dir, "stats", dir, "--write", "--out", res)
	if code != 0 {
		t.Fatalf("stats: %d %s", code, errs)
	}
	var j struct {
		Software string `json:"software"`
		Sources  []struct {
			SHA256 string `json:"sha256"`
		} `json:"sources"`
		Figures []struct {
			File    string `json:"file"`
			Caption string `json:"caption"`
		} `json:"figures"`
	}
	b, err := os.ReadFile(filepath.Join(res, "rate_threshold.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &j); err != nil {
		t.Fatal(err)
	}
	// Two muscles, each as PNG and SVG.
	if len(j.Figures) != 4 || len(j.Sources) != 2 || j.Software == "" {
		t.Fatalf("figures %+v, %d sources", j.Figures, len(j.Sources))
	}
	for _, fig := range j.Figures {
		fh, err := os.Open(filepath.Join(res, fig.File))
		if err != nil {
			t.Fatal(err)
		}
		if strings.HasSuffix(fig.File, ".png") {
			cfg, err := png.DecodeConfig(fh)
			if err != nil || cfg.Width < 500 || cfg.Height < 300 {
				t.Errorf("%s: %v %+v", fig.File, err, cfg)
			}
		}
		fh.Close()
		if !strings.Contains(fig.Caption, "R²") {
			t.Errorf("%s: caption %q", fig.File, fig.Caption)
		}
	}
	if after := sums(t, dir); after != before {
		t.Errorf("the recordings changed")
	}
}

func sums(t *testing.T, dir string) string {
	t.Helper()
	var s []string
	for _, n := range []string{"s1.h5", "s2.h5"} {
		b, err := os.ReadFile(filepath.Join(dir, n))
		if err != nil {
			t.Fatal(err)
		}
		s = append(s, fmt.Sprintf("%x", sha256.Sum256(b)))
	}
	return strings.Join(s, " ")
}
