package main

import (
	"fmt"
	"os"
	"path/filepath"

	"muarc/archive"
)

func init() {
	registerDemoStep(70, "pack", demoPack)
}

// demoPack packs the de-identified recordings into DIR/deposit/ as a BagIt
// deposit, verifies it and prints the outcome. Without de-identified
// recordings it packs the demo's own recordings with --allow-identified
// semantics and says so.
func demoPack(ctx *demoContext) error {
	src, _ := ctx.Summary["deidentified_dir"].(string)
	allow := false
	if src == "" {
		src, allow = ctx.RecordingsDir, true
	}
	if src == "" {
		return nil
	}
	if _, err := os.Stat(src); err != nil {
		return fmt.Errorf("pack: %w", err)
	}
	out := filepath.Join(ctx.Dir, "deposit")
	opt := archive.PackOptions{AllowIdentified: allow, Overwrite: true}
	// The demo study names its licence in /study; if it does not, the demo
	// uses CC-BY-4.0 and says so.
	sums, _ := archive.Summaries(src, 0)
	hasLicence := false
	for _, s := range sums {
		hasLicence = hasLicence || s.Study.License != ""
	}
	if !hasLicence {
		opt.Licence = "CC-BY-4.0"
	}
	var bar *progress
	opt.Progress = func(n, total int64) {
		if bar == nil {
			bar = newProgress("pack", total)
		}
		bar.Add(n)
	}
	res, err := archive.Pack(src, out, opt)
	bar.Finish()
	if err != nil {
		if res != nil && !ctx.JSON {
			printPack(ctx.Out, res, res.ReportShard())
		}
		return fmt.Errorf("pack %s: %w", src, err)
	}
	vbar := newProgress("verify", res.PayloadBytes)
	rep, err := archive.VerifyDeposit(out, archive.VerifyOptions{Progress: vbar.Add})
	vbar.Finish()
	if err != nil {
		return fmt.Errorf("verify %s: %w", out, err)
	}
	rel := out
	if r, err := filepath.Rel(ctx.Dir, out); err == nil {
		rel = r
	}
	if ctx.JSON {
		ctx.Summary["deposit_dir"] = out
		ctx.Summary["pack"] = map[string]any{"deposit": out, "payload_files": res.PayloadFiles, "payload_bytes": res.PayloadBytes,
			"licence": res.Licence, "identified": res.Identified, "notes": archiveStrings(res.Notes),
			"verify_ok": rep.OK(), "verify_findings": len(rep.Findings), "chunks_checked": rep.Chunks}
	} else {
		fmt.Fprintf(ctx.Out, "\nDeposit (muarc pack %s -o %s, then muarc verify):\n", src, rel)
		if allow {
			fmt.Fprintln(ctx.Out, "no de-identified recordings from an earlier step: packed the demo recordings with --allow-identified; bag-info.txt marks the deposit as carrying identifying data")
		}
		printPack(ctx.Out, res, res.ReportShard())
		for _, f := range rep.Findings {
			fmt.Fprintln(ctx.Out, f)
		}
		verdict := "verified: complete and valid (RFC 8493), every recording valid, every chunk's Fletcher-32 right"
		if !rep.OK() {
			verdict = fmt.Sprintf("verify found %d problems", len(rep.Findings))
		}
		fmt.Fprintf(ctx.Out, "%s: %s (%d recordings, %d chunks)\n", rel, verdict, rep.Recordings, rep.Chunks)
	}
	if !rep.OK() {
		return fmt.Errorf("the demo deposit %s failed verification", out)
	}
	return nil
}
