package main

import (
	"fmt"
	"path/filepath"
	"strings"

	"muarc/convert"
)

func init() {
	registerDemoStep(20, "import", demoImport)
}

// demoImport imports the generator's plain-text exports (one folder per
// recording under ctx.ExportsDir) into muarc files in ctx.RecordingsDir with
// the built-in profile, as `muarc import EXPORTS -o RECORDINGS` would.
func demoImport(ctx *demoContext) error {
	res, err := importStudyDir(ctx.ExportsDir, ctx.RecordingsDir, convert.StudyOptions{Profile: convert.DefaultProfile(), Overwrite: true}, "import")
	if err != nil {
		return err
	}
	var failed []string
	for _, r := range res {
		if r.Error != "" {
			failed = append(failed, r.Recording+": "+r.Error)
			continue
		}
		abs, err := filepath.Abs(r.Output)
		if err != nil {
			return err
		}
		ctx.Recordings = append(ctx.Recordings, abs)
	}
	if ctx.JSON {
		ctx.Summary["import"] = res
	} else {
		fmt.Fprintf(ctx.Out, "\nImport (muarc import %s -o %s):\n", importRel(ctx.Dir, ctx.ExportsDir), importRel(ctx.Dir, ctx.RecordingsDir))
		for _, r := range res {
			if r.Error != "" {
				continue
			}
			files, emg := 0, ""
			for _, f := range r.Report.Files {
				files++
				if f.Role == "emg" && emg == "" {
					emg = fmt.Sprintf("; EMG %s (%s)", f.DType, strings.SplitN(f.DTypeWhy, ":", 2)[0])
				}
			}
			fmt.Fprintf(ctx.Out, "  %s: %d files -> %s%s\n", r.Recording, files, importRel(ctx.Dir, r.Output), emg)
		}
	}
	if len(failed) > 0 {
		return fmt.Errorf("import failed for %d recordings:\n  %s", len(failed), strings.Join(failed, "\n  "))
	}
	return nil
}

func importRel(base, p string) string {
	if r, err := filepath.Rel(base, p); err == nil {
		return r
	}
	return p
}
