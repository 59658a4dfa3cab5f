package main

import (
	"io"
	"sort"
)

// demoContext is what the demo's steps share: the output folder, the files
// each earlier step made, and where to print.
type demoContext struct {
	// Dir is the demo's output folder (absolute).
	Dir string
	// ExportsDir holds the generator's plain-text exports, one folder per
	// recording; RecordingsDir the muarc files the demo made from them.
	ExportsDir    string
	RecordingsDir string
	// Recordings lists the muarc files written so far (absolute paths).
	Recordings []string
	// Out is where steps print for people; JSON is true under --json, when
	// steps add to Summary instead of printing.
	Out     io.Writer
	JSON    bool
	Summary map[string]any
}

// demoStep is one stage of `muarc demo`. Steps run in ascending order.
type demoStep struct {
	order int
	name  string
	run   func(*demoContext) error
}

var demoSteps []demoStep

// registerDemoStep adds a stage to the demo; each capability's own
// demo_<name>.go calls it from init. Orders used: 10 generate, 20 import,
// 30 table, 35 stats, 40 validate, 50 deidentify, 60 report, 70 pack.
func registerDemoStep(order int, name string, run func(*demoContext) error) {
	demoSteps = append(demoSteps, demoStep{order, name, run})
	sort.SliceStable(demoSteps, func(i, j int) bool { return demoSteps[i].order < demoSteps[j].order })
}
