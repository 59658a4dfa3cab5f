package main

import (
	"fmt"
	"path/filepath"

	"muarc/bids"
)

func init() {
	registerDemoStep(75, "bids", demoBIDS)
}

// demoBIDS writes the de-identified study as a BIDS-EMG dataset in
// DIR/bids/, beside the deposit.
func demoBIDS(ctx *demoContext) error {
	src, _ := ctx.Summary["deidentified_dir"].(string)
	if src == "" {
		return nil // only de-identified recordings go into a shareable dataset
	}
	out := filepath.Join(ctx.Dir, "bids")
	rep, err := bids.Export(src, out, bids.Options{Overwrite: true})
	if err != nil {
		return fmt.Errorf("bids: %w", err)
	}
	if ctx.JSON {
		ctx.Summary["bids"] = rep
		return nil
	}
	fmt.Fprintf(ctx.Out, "\nBIDS-EMG dataset (muarc export %s --bids %s):\n", src, out)
	printBIDS(ctx.Out, ctx.Out, rep)
	return nil
}
