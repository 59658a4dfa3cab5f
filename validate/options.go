package validate

import (
	"sort"
	"strings"
)

// Options control a validation run.
type Options struct {
	// Strict makes warnings errors.
	Strict bool
	// Rules are the thresholds and switched-off checks; the zero Rules means
	// DefaultRules.
	Rules Rules
	// ChecksumScan reads every stored chunk and checks its Fletcher-32
	// checksum (default true). Off, a damaged chunk is found only if the
	// content checks happen to read it.
	ChecksumScan bool
	// SamplesReadByCaller, with ChecksumScan, leaves the EMG samples to a
	// caller that reads every chunk of them next with its Fletcher-32
	// check (de-identification copies or decodes them all): their chunk
	// index is still checked, their chunk bytes are not read here and not
	// scanned for infinities. The caller must treat a checksum failure in
	// its read as damage and validate again without this option to report
	// it (deid does).
	SamplesReadByCaller bool
}

// DefaultOptions are not strict, DefaultRules, with the checksum scan on.
func DefaultOptions() Options {
	return Options{Rules: DefaultRules(), ChecksumScan: true}
}

// finish applies the options to raw findings: drops switched-off checks,
// repeats (the same check at the same place) and schema findings that a
// named check reports at the same JSON path, re-ranks by the rules and makes
// warnings errors under Strict. The order is kept.
func finish(fs []Finding, opt Options) []Finding {
	r := opt.Rules
	if r.isZero() {
		r = DefaultRules()
	}
	type key struct{ check, h, j string }
	seen := map[key]bool{}
	// A schema finding at a place a named check also reports says the same
	// thing less well: keep the named check's.
	// So does a schema finding on a cell of a column (".../x_mm[3]") whose
	// dataset a named check reports (".../x_mm").
	named := map[string]bool{}
	namedObj := map[string]bool{}
	for _, f := range fs {
		if !strings.HasPrefix(f.Check, "metadata.") && !r.disabled(f.Check) {
			if f.JSONPath != "" {
				named[f.JSONPath] = true
			}
			if f.HDF5Path != "" && f.Severity == Error {
				namedObj[f.HDF5Path] = true
			}
		}
	}
	out := fs[:0:0]
	for _, f := range fs {
		if r.disabled(f.Check) || strings.HasPrefix(f.Check, "metadata.") && (named[f.JSONPath] || namedObj[cellObject(f.HDF5Path)]) {
			continue
		}
		k := key{f.Check, f.HDF5Path, f.JSONPath}
		if seen[k] {
			continue
		}
		seen[k] = true
		if _, ok := r.Severity[f.Check]; ok || hasPatternFor(r, f.Check) {
			f.Severity = r.severity(f.Check)
		}
		if opt.Strict && f.Severity == Warning {
			f.Severity = Error
		}
		out = append(out, f)
	}
	return out
}

func hasPatternFor(r Rules, id string) bool {
	for k := range r.Severity {
		if matchCheck(k, id) {
			return true
		}
	}
	return false
}

// sortFindings orders findings by HDF5 path, then severity (worst first),
// then check id, so a report reads object by object.
func sortFindings(fs []Finding) {
	sort.SliceStable(fs, func(i, j int) bool {
		a, b := fs[i], fs[j]
		if a.HDF5Path != b.HDF5Path {
			return a.HDF5Path < b.HDF5Path
		}
		if a.Severity != b.Severity {
			return a.Severity > b.Severity
		}
		return a.Check < b.Check
	})
}

// cellObject strips a table cell's "[row]" from an HDF5 path as
// recfile.HDF5Path writes it.
func cellObject(p string) string {
	if i := strings.LastIndexByte(p, '['); i > 0 && strings.HasSuffix(p, "]") {
		return p[:i]
	}
	return p
}
