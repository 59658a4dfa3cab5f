package main

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"

	"muarc/deid"
)

func init() {
	registerDemoStep(50, "deidentify", demoDeidentify)
}

// demoDeidentify makes a demo study key beside (not inside) the shared
// folder, de-identifies the demo's recordings into DIR/deidentified/ and
// shows the report.
func demoDeidentify(ctx *demoContext) error {
	if len(ctx.Recordings) == 0 {
		return nil
	}
	keyPath := filepath.Join(ctx.Dir, "demo-study.key")
	key, err := deid.LoadKey(keyPath)
	if errors.Is(err, fs.ErrNotExist) {
		key, err = deid.NewKeyFile(keyPath)
	}
	if err != nil {
		return fmt.Errorf("demo key: %w", err)
	}
	src := ctx.RecordingsDir
	var rels []string
	for _, r := range ctx.Recordings {
		rel, err := filepath.Rel(src, r)
		if err != nil {
			return err
		}
		rels = append(rels, rel)
	}
	outDir := filepath.Join(ctx.Dir, "deidentified")
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return err
	}
	bar := newProgress("deidentify", int64(len(rels)))
	rep, err := deid.DeidentifyFiles(src, rels, outDir, deid.StudyOptions{Key: key, Overwrite: true,
		Progress: func(int, int) { bar.Add(1) }})
	bar.Finish()
	if err != nil {
		return err
	}
	ctx.Summary["deidentified_dir"] = outDir
	if ctx.JSON {
		ctx.Summary["deidentify"] = rep
	} else {
		fmt.Fprintf(ctx.Out, "\nDe-identification (muarc deidentify %s -o %s --key %s):\n",
			deidRel(ctx.Dir, src), deidRel(ctx.Dir, outDir), deidRel(ctx.Dir, keyPath))
		rep.WriteText(ctx.Out, deidRel(ctx.Dir, outDir))
	}
	if rep.Failed > 0 {
		return fmt.Errorf("de-identification failed for %d of %d recordings", rep.Failed, len(rels))
	}
	return nil
}

func deidRel(base, p string) string {
	if r, err := filepath.Rel(base, p); err == nil {
		return r
	}
	return p
}
