package deid

import (
	"fmt"
	"muarc/internal/atomicfile"
	"muarc/recfile"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
)

// Writing one output and checking it before it is published.

// doFile de-identifies one input.
func doFile(j *job, outDir string, pol *Policy, ps *Pseudonymizer, opt StudyOptions) (FileOutcome, error) {
	fo := FileOutcome{Output: j.out}
	if j.preError != nil {
		return fo, j.preError
	}
	f, err := recfile.Open(j.in)
	if err != nil {
		return fo, err
	}
	defer f.Close()
	rec := f.Recording()
	res, err := Apply(rec, Options{Policy: pol, Pseudonymizer: ps, InputPath: j.in, Now: opt.Now, AcceptedDamage: j.damage, people: j.people})
	if err != nil {
		return fo, err
	}
	fo.Subject, fo.Session = res.Subject, res.Session
	// Kept to the end of the run: copies without the spare capacity.
	fo.Fields, fo.Unlisted, fo.Scrubbed, fo.Notes = slices.Clone(res.Fields), slices.Clone(res.Unlisted), res.Scrubbed, res.Notes
	fo.quasi, fo.pseud = res.Quasi, ps.Subject(j.subj)
	fo.InStudy = res.InStudy
	if len(j.unread) > 0 {
		fo.Notes = append(fo.Notes, fmt.Sprintf("left out, not part of the layout (muarc does not read or check them): %s", strings.Join(j.unread, ", ")))
	}
	if len(j.damage) > 0 {
		fo.Notes = append(fo.Notes, fmt.Sprintf("the source fails its integrity checks (%s); de-identified as read because damage was accepted, and recorded in the output's history", damageCounts(j.damage)))
	}
	final := filepath.Join(outDir, j.out)
	if err := atomicfile.CheckTarget(final, opt.Overwrite); err != nil {
		return fo, err // a dry run says so too
	}
	if pol.SHA256() == Default().SHA256() {
		if still := IdentifyingFields(res.Recording); len(still) > 0 {
			return fo, fmt.Errorf("the output would still hold identifying fields %s; it was not written", strings.Join(still, ", "))
		}
	}
	if opt.DryRun {
		return fo, nil
	}
	t, err := atomicfile.Create(final, opt.Overwrite)
	if err != nil {
		return fo, err
	}
	// Samples stored as the writer would store them are copied chunk by
	// chunk (recfile.CopiesSamplesRaw), their Fletcher-32 checked on the
	// way; the output's stored chunks must then be the input's, byte for
	// byte (compared after writing). Other samples are hashed as the writer streams
	// them (it reads each array once, in order), so the input need not be
	// read twice. The output stays mode 0600 under its temporary name
	// until it has passed the scan.
	wopt := recfile.WriteOptions{Overwrite: true, DecodeSamples: opt.decodeSamples}
	known := map[string]string{}
	wopt.SamplesCopied = func(ti, ai int) {
		known[fmt.Sprintf("trials[%d].arrays[%d].samples", ti, ai)] = copiedRaw
	}
	hashed := wrapSamples(res.Recording, wopt)
	err = recfile.WriteInto(t.Path, res.Recording, wopt)
	for _, hs := range hashed {
		hs.rec.Samples = hs.src // unwrap
	}
	if err != nil {
		err = t.Abandon(fmt.Errorf("%s: %w", final, err))
		if !j.fullCheck {
			// The samples' chunks were left to the write: see whether
			// the source is damaged, and report it as the full check
			// does.
			return recheck(j, outDir, pol, ps, opt, fo, err)
		}
		return fo, err
	}
	// The output is complete: its disk writes overlap the checks below.
	t.StartSync()
	fo.RawCopied = len(known)
	for path, hs := range hashed {
		if d, ok := hs.sum(); ok {
			known[path] = d
		}
	}
	scan, n, err := verifyOutput(t.Path, res, pol, known)
	fo.Scan, fo.DataChecked = scan, n
	if err != nil {
		return fo, t.Abandon(err)
	}
	return fo, t.Publish()
}

// recheck runs the full source check after a failed write (writeErr) of a
// source checked without its samples' chunk bytes. A damaged source is
// then refused with the full check's report, as if found before the write,
// or, when damage is accepted, de-identified again with the damage
// recorded, as it would have been; otherwise the write's error stands.
func recheck(j *job, outDir string, pol *Policy, ps *Pseudonymizer, opt StudyOptions, fo FileOutcome, writeErr error) (FileOutcome, error) {
	checkSource(j, opt, true)
	switch {
	case j.preError != nil:
		refused := FileOutcome{}
		if j.single {
			refused.Output = j.out
		}
		return refused, j.preError
	case len(j.damage) > 0:
		return doFile(j, outDir, pol, ps, opt)
	}
	return fo, writeErr
}

// verifyOutput scans a written output for the original identifying values
// (raw bytes and decoded metadata), asks IdentifyingFields about it under the
// default policy, and compares every dataset's values with the input's.
// The byte scan runs beside the rest (the two read different parts of the
// file, on different cores); every finding is judged as before, leaks
// first.
func verifyOutput(path string, res *Result, pol *Policy, known map[string]string) (*ScanSummary, int, error) {
	needles := res.Needles()
	sum := &ScanSummary{Values: len(needles), Unscannable: res.Unscannable, Leaks: []string{}}
	if fi, err := os.Stat(path); err == nil {
		sum.Bytes = fi.Size()
	}
	type scanned struct {
		leaks []Leak
		err   error
	}
	scan := make(chan scanned, 1)
	go func() {
		leaks, err := ScanBytes(path, needles)
		scan <- scanned{leaks, err}
	}()
	view, err := recfile.MetadataView(path)
	if err != nil {
		return sum, 0, fmt.Errorf("reading the output back: %w", err)
	}
	f, err := recfile.Open(path)
	if err != nil {
		return sum, 0, fmt.Errorf("reading the output back: %w", err)
	}
	defer f.Close()
	out := f.Recording()
	wf, _ := checkWords(out, res.words)
	sum.Findings = mergeFindings(checkStrings(out, needles), append(append(wf, checkOthers(out, res.people, res.originalID)...), checkPhones(out, res.phones)...))
	sum.StillIdentifying = IdentifyingFields(out)
	want, werr := dataDigests(res.Recording, known)
	got, gerr := dataDigests(out, sameStored(res.Recording, out, known))
	sc := <-scan
	if sc.err != nil {
		return sum, 0, sc.err
	}
	for _, l := range sc.leaks {
		sum.Leaks = append(sum.Leaks, l.String())
	}
	for _, h := range scanText(viewText(view), needles) {
		sum.Leaks = append(sum.Leaks, maskValue(h)+" found in the decoded metadata")
	}
	if len(sum.Leaks) > 0 || len(sum.Findings) > 0 {
		return sum, 0, &OutputError{Findings: sum.Findings, Leaks: sum.Leaks}
	}
	if pol.SHA256() == Default().SHA256() && len(sum.StillIdentifying) > 0 {
		return sum, 0, fmt.Errorf("the output still holds identifying fields %s; it was not written", strings.Join(sum.StillIdentifying, ", "))
	}
	if werr != nil {
		return sum, 0, fmt.Errorf("checksums of the input's data: %w", werr)
	}
	if gerr != nil {
		return sum, 0, fmt.Errorf("checksums of the output's data: %w", gerr)
	}
	var diff []string
	for k, v := range want {
		if got[k] != v {
			diff = append(diff, k)
		}
	}
	for k := range got {
		if _, ok := want[k]; !ok {
			diff = append(diff, k+" (not in the input)")
		}
	}
	if len(diff) > 0 {
		sort.Strings(diff)
		return sum, 0, fmt.Errorf("data changed in writing: %s; the output was not written", strings.Join(diff, ", "))
	}
	return sum, len(want), nil
}
