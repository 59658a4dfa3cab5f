package main

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"muarc/internal/atomicfile"
)

// demoMarker marks a folder as made by `muarc demo`, so a later demo may
// clear it; a folder without it is never deleted.
const demoMarker = ".muarc-demo"

func init() {
	var out string
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "demo [--out DIR]",
		Short: "Run the whole job end to end on a built-in synthetic study",
		Long: `demo generates an invented study (subjects, two muscles recorded at once with
electrode grids, trapezoidal contractions at several % MVC levels) as the
plain-text exports a lab would hold, then runs muarc on it end to end: import,
read back and tabulate, validate, de-identify, report, and pack a verified
deposit. Everything lands under --out (default ./demo-out); a folder from an
earlier demo is cleared first, any other non-empty folder is refused.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runDemo(cmd, out, asJSON)
		},
	}
	cmd.Flags().StringVar(&out, "out", "demo-out", "output folder")
	cmd.Flags().BoolVar(&asJSON, "json", false, "machine output: one JSON summary at the end")
	rootCmd.AddCommand(cmd)
}

func runDemo(cmd *cobra.Command, out string, asJSON bool) error {
	dir, err := filepath.Abs(out)
	if err != nil {
		return withExit(2, err)
	}
	if err := prepareDemoDir(dir); err != nil {
		return withExit(2, err)
	}
	ctx := &demoContext{
		Dir:           dir,
		ExportsDir:    filepath.Join(dir, "exports"),
		RecordingsDir: filepath.Join(dir, "recordings"),
		Out:           cmd.OutOrStdout(),
		JSON:          asJSON,
		Summary:       map[string]any{"dir": dir},
	}
	if !asJSON {
		fmt.Fprintf(ctx.Out, "muarc demo: an invented study, end to end, in %s\n", dir)
	}
	steps := []map[string]any{}
	for _, s := range demoSteps {
		start := time.Now()
		err := s.run(ctx)
		secs := time.Since(start).Seconds()
		steps = append(steps, map[string]any{"step": s.name, "seconds": secs, "ok": err == nil})
		if err != nil {
			ctx.Summary["steps"] = steps
			if asJSON {
				ctx.Summary["error"] = err.Error()
				printJSON(ctx.Out, ctx.Summary)
			}
			return withExit(1, fmt.Errorf("demo step %q: %w", s.name, err))
		}
	}
	ctx.Summary["steps"] = steps
	if asJSON {
		return printJSON(ctx.Out, ctx.Summary)
	}
	fmt.Fprintf(ctx.Out, "\nWhere everything is (under %s):\n", dir)
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), ".") {
			continue
		}
		suffix := ""
		if e.IsDir() {
			suffix = "/"
		}
		fmt.Fprintf(ctx.Out, "  %s%s  %s\n", e.Name(), suffix, demoWhat(e.Name()))
	}
	fmt.Fprintf(ctx.Out, "\nDone in %.1f s. Try: %s inspect %s\n", totalSeconds(steps), runnable(), shortPath(firstOr(ctx.Recordings, filepath.Join(ctx.RecordingsDir, "FILE.h5"))))
	return nil
}

// demoWhat explains a top-level entry of the demo folder.
func demoWhat(name string) string {
	switch name {
	case "exports":
		return "the plain-text exports a lab would hold (with identifying details)"
	case "recordings":
		return "muarc files imported from them (identified: not for sharing)"
	case "deidentified":
		return "de-identified copies, the ones to share"
	case "deposit":
		return "a BagIt deposit of the de-identified study, verified"
	case "bids":
		return "the de-identified study as a BIDS 1.11.0 EMG dataset (BDF+ with sidecars)"
	case "report.html":
		return "the study report (open in a browser)"
	case "demo-study.key":
		return "the demo's study key (keep such keys private, outside any deposit)"
	}
	return ""
}

func totalSeconds(steps []map[string]any) float64 {
	t := 0.0
	for _, s := range steps {
		t += s["seconds"].(float64)
	}
	return t
}

func firstOr(list []string, def string) string {
	if len(list) > 0 {
		return list[0]
	}
	return def
}

// prepareDemoDir makes dir ready: created if absent, cleared if an earlier
// demo made it, refused if it holds anything else.
func prepareDemoDir(dir string) error {
	entries, err := os.ReadDir(dir)
	switch {
	case errors.Is(err, fs.ErrNotExist):
	case err != nil:
		return err
	case len(entries) == 0:
	default:
		if _, err := os.Stat(filepath.Join(dir, demoMarker)); err != nil {
			return fmt.Errorf("%s is not empty and was not made by muarc demo; give --out a new or empty folder", dir)
		}
		for _, e := range entries {
			if err := os.RemoveAll(filepath.Join(dir, e.Name())); err != nil {
				return err
			}
		}
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	return atomicfile.WriteFile(filepath.Join(dir, demoMarker), []byte("made by muarc demo; the next demo run may clear this folder\n"), true)
}

// runnable is how this binary is run from the current folder: "muarc" when
// that is the one on PATH, else its path ("./bin/muarc" after make demo), so
// that the command printed works as printed.
func runnable() string {
	exe, err := os.Executable()
	if err != nil {
		return "muarc"
	}
	if p, err := exec.LookPath("muarc"); err == nil {
		if a, b := evalPath(p), evalPath(exe); a == b {
			return "muarc"
		}
	}
	return shortPath(exe)
}

func evalPath(p string) string {
	if r, err := filepath.EvalSymlinks(p); err == nil {
		p = r
	}
	a, _ := filepath.Abs(p)
	return a
}

// shortPath is p relative to the current folder when it lies below it
// ("./bin/muarc"), else p.
func shortPath(p string) string {
	wd, err := os.Getwd()
	if err != nil {
		return p
	}
	if r, err := filepath.Rel(wd, p); err == nil && !strings.HasPrefix(r, "..") {
		if !strings.ContainsRune(r, filepath.Separator) || !strings.HasPrefix(r, ".") {
			return "." + string(filepath.Separator) + r
		}
		return r
	}
	return p
}
