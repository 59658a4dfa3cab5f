package main

import (
	"encoding/json"
	"html"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestReportFiguresLeftOutRunAsPrinted: report --figures 1 on three
// recordings counts two recordings without figures, and the command each
// of their sections prints, run as written by a POSIX shell from the same
// folder, draws that recording's figures.
func TestReportFiguresLeftOutRunAsPrinted(t *testing.T) {
	src, err := os.ReadFile(testFile(t))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	study := filepath.Join("my study", "sub 1")
	os.MkdirAll(filepath.Join(dir, study), 0o755)
	for _, n := range []string{"a.h5", "b.h5", "c.h5"} {
		if err := os.WriteFile(filepath.Join(dir, study, n), src, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	stdout, stderr, code := runMuarc(t, dir, "report", "my study", "-o", "page.html", "--figures", "1", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var s reportSummary
	if err := json.Unmarshal([]byte(stdout), &s); err != nil {
		t.Fatal(err)
	}
	if s.Recordings != 3 || s.FiguresLeftOut != 2 || s.Figures == 0 {
		t.Fatalf("summary %+v", s)
	}
	page, err := os.ReadFile(filepath.Join(dir, "page.html"))
	if err != nil {
		t.Fatal(err)
	}
	cmds := regexp.MustCompile(`To draw them: <code>([^<]*)</code>`).FindAllStringSubmatch(string(page), -1)
	if len(cmds) != 2 {
		t.Fatalf("%d plot commands in the page, want 2", len(cmds))
	}
	for i, c := range cmds {
		line := html.UnescapeString(c[1])
		name := []string{"b", "c"}[i]
		want := "muarc plot 'my study/sub 1/" + name + ".h5' -o 'figures/sub 1/" + name + "'"
		if line != want {
			t.Fatalf("command %q, want %q", line, want)
		}
		if out, err := runAsPrinted(dir, line); err != nil {
			t.Fatalf("%s: %v\n%s", line, err, out)
		}
		pngs, _ := filepath.Glob(filepath.Join(dir, "figures", "sub 1", name, "*.png"))
		if len(pngs) == 0 || !strings.HasSuffix(pngs[0], ".png") {
			t.Fatalf("%s drew no PNG", line)
		}
	}
	// The validate command a section names works from where report ran:
	// it lists the findings the section counts (exit 0 or 1, not 2).
	vcmds := regexp.MustCompile(`To see every finding with its hint: (muarc validate [^<]*)</p>`).FindAllStringSubmatch(string(page), -1)
	if len(vcmds) != 3 {
		t.Fatalf("%d validate commands in the page, want 3", len(vcmds))
	}
	for i, c := range vcmds {
		line := html.UnescapeString(c[1])
		if want := "muarc validate 'my study/sub 1/" + []string{"a", "b", "c"}[i] + ".h5'"; line != want {
			t.Fatalf("command %q, want %q", line, want)
		}
		out, err := runAsPrinted(dir, line)
		if ee, ok := err.(*exec.ExitError); err != nil && (!ok || ee.ExitCode() != 1) || !strings.Contains(string(out), "a.h5") && i == 0 {
			t.Fatalf("%s: %v\n%s", line, err, out)
		}
	}
	if _, _, code := runMuarc(t, dir, "report", "my study", "-o", "x.html", "--figures", "some"); code != 2 {
		t.Errorf("--figures some: exit %d, want 2", code)
	}
}

// runAsPrinted runs a command line a page prints through a POSIX shell in
// dir, with the muarc under test first on PATH.
func runAsPrinted(dir, line string) ([]byte, error) {
	sh := exec.Command("/bin/sh", "-c", line)
	sh.Dir = dir
	sh.Env = append(os.Environ(), "PATH="+filepath.Dir(muarcBin)+string(os.PathListSeparator)+os.Getenv("PATH"))
	return sh.CombinedOutput()
}
