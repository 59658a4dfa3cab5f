package main

import (
	"fmt"

	"muarc/synth"
)

func init() {
	registerDemoStep(10, "generate", demoGenerate)
}

// demoGenerate writes the built-in study's plain-text exports.
func demoGenerate(ctx *demoContext) error {
	cfg := synth.DemoConfig()
	gens, err := synth.Generate(cfg)
	if err != nil {
		return err
	}
	p := newProgress("exports", 0)
	var total int64
	for _, g := range gens {
		for _, t := range g.Recording.Trials {
			for _, a := range t.Arrays {
				n, _ := a.Samples.Shape()
				total += int64(n)
			}
		}
	}
	p.total = total
	for _, g := range gens {
		var last int64
		err := g.WriteExportsOpt(ctx.ExportsDir, synth.ExportOptions{Progress: func(done, _ int64) {
			p.Add(done - last)
			last = done
		}})
		if err != nil {
			return err
		}
	}
	p.Finish()
	subjects := make([]string, len(gens))
	for i, g := range gens {
		subjects[i] = g.Recording.Subject.ID
	}
	if ctx.JSON {
		ctx.Summary["generate"] = map[string]any{"seed": cfg.Seed, "recordings": subjects, "exports": ctx.ExportsDir}
		return nil
	}
	fmt.Fprintf(ctx.Out, "\nGenerate: %d invented subjects (seed %d), plain-text exports in %s\n", len(gens), cfg.Seed, importRel(ctx.Dir, ctx.ExportsDir))
	return nil
}
