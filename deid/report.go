package deid

import (
	"fmt"
	"io"
	"sort"
	"strings"
	"text/tabwriter"
)

// WriteText prints the check's report for people.
func (r *CheckReport) WriteText(w io.Writer) {
	fmt.Fprintf(w, "%s: %d bytes", r.File, r.Bytes)
	if r.Searched > 0 {
		fmt.Fprintf(w, ", %d original value(s) searched for (UTF-8, UTF-16LE/BE, dates in common spellings)", r.Searched)
	} else {
		fmt.Fprint(w, "; give --original (or --needle) to search the bytes for original values")
	}
	fmt.Fprintln(w)
	for _, p := range r.StillIdentifying {
		fmt.Fprintf(w, "  identifying field: %s\n", p)
	}
	for _, p := range r.Patterns {
		fmt.Fprintf(w, "  pattern: %s\n", p)
	}
	for _, l := range r.Leaks {
		fmt.Fprintf(w, "  LEAK in the raw bytes: %s\n", l)
	}
	writeFindings(w, r.Findings, "  ")
	if len(r.ValuesOnly) > 0 {
		fmt.Fprintf(w, "  searched in the values only, being ordinary words (the layout's own names hold such words): %s\n", strings.Join(r.ValuesOnly, ", "))
	}
	for _, n := range r.Notes {
		fmt.Fprintf(w, "  note: %s\n", n)
	}
	if len(r.Unscannable) > 0 {
		fmt.Fprintf(w, "  not searched (too short): %s\n", strings.Join(r.Unscannable, ", "))
	}
	if r.OK() {
		fmt.Fprintln(w, "  nothing found")
	}
	fmt.Fprintln(w, Caution)

}

// WriteText prints the report for people; outDir is the output as the
// person named it.
func (rep *StudyReport) WriteText(w io.Writer, outDir string) {
	verb := "De-identified"
	if rep.DryRun {
		verb = "Dry run: would de-identify"
	}
	fmt.Fprintf(w, "%s %d of %d file(s) into %s\n", verb, len(rep.Files)-rep.Failed, len(rep.Files), outDir)
	fmt.Fprintf(w, "policy %s (sha256 %s), key %s\n", rep.Policy, rep.PolicySHA256, rep.KeyFingerprint)
	if rep.DryRun {
		fmt.Fprintln(w, "\nPlan (every field of the layout and what the policy does to it):")
		tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		for _, l := range rep.Plan {
			fmt.Fprintf(tw, "  %s\t%s\n", l.Path, l.Action)
		}
		tw.Flush()
	}
	fmt.Fprintln(w)
	unlisted := map[string]int{}
	for _, f := range rep.Files {
		switch {
		case len(f.Findings) > 0:
			fmt.Fprintf(w, "  %s  NOT WRITTEN: it would still identify the subject:\n", f.Input)
			writeFindings(w, f.Findings, "      ")
		case f.Error != "":
			fmt.Fprintf(w, "  %s  FAILED: %s\n", f.Input, f.Error)
		case rep.DryRun:
			fmt.Fprintf(w, "  %s -> %s\n", f.Input, f.Output)
			tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
			for _, fo := range f.Fields {
				note := fo.Note
				if !fo.Named {
					note = strings.TrimSpace("not named in the policy " + note)
				}
				fmt.Fprintf(tw, "      %s\t%s\t%s\n", fo.Path, fo.Action, note)
			}
			tw.Flush()
		default:
			line := fmt.Sprintf("  %s -> %s  ok", f.Input, f.Output)
			if f.Scan != nil {
				line += fmt.Sprintf(": %d original values searched in %d bytes, no leak; %d datasets bit-exact", f.Scan.Values, f.Scan.Bytes, f.DataChecked)
			}
			fmt.Fprintln(w, line)
			if f.InStudy > 0 {
				fmt.Fprintf(w, "      not searched: %d word(s) of the site, operator or notes that the study's own metadata (kept) also holds\n", f.InStudy)
			}
			if f.Scan != nil && len(f.Scan.Unscannable) > 0 {
				fmt.Fprintf(w, "      not searched, 1-2 characters long: %s\n", strings.Join(f.Scan.Unscannable, ", "))
			}
		}
		for _, n := range f.Notes {
			fmt.Fprintf(w, "      note: %s\n", n)
		}
		for _, u := range f.Unlisted {
			unlisted[PolicyPath(u)]++
		}
	}
	if len(unlisted) > 0 {
		fmt.Fprintln(w, "\nDropped because the policy does not name them:")
		keys := make([]string, 0, len(unlisted))
		for k := range unlisted {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			fmt.Fprintf(w, "  %s (%d)\n", k, unlisted[k])
		}
	}
	for _, c := range rep.Collisions {
		fmt.Fprintf(w, "pseudonym collision: %s (make a new key)\n", c)
	}
	if k := rep.KAnonymity; k != nil {
		k.WriteText(w)
	}
	if rep.Linkage != "" {
		fmt.Fprintf(w, "\nprivate linkage file: %s (mode 0600; keep it apart from the shared data)\n", rep.Linkage)
	}
	for _, n := range rep.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	fmt.Fprintf(w, "\n%s\n", Caution)
}

func (k *KReport) WriteText(w io.Writer) {
	fmt.Fprintf(w, "\nk-anonymity (k = %d) over sex, age band, height, mass, dominant side as written:\n", k.K)
	fmt.Fprintf(w, "  %d subject(s) in %d group(s); smallest group %d\n", k.Subjects, k.Groups, k.Smallest)
	if len(k.BelowK) == 0 {
		fmt.Fprintf(w, "  every subject shares its values with at least %d - 1 others\n", k.K)
		return
	}
	fmt.Fprintf(w, "  %d subject(s) below k: %s\n", len(k.BelowK), strings.Join(k.BelowK, ", "))
	if len(k.Steps) > 0 {
		fmt.Fprintln(w, "  generalisations that would lift them (in order; policy setting, subjects still below k):")
		for i, s := range k.Steps {
			fmt.Fprintf(w, "    %d. %s  (%s)  -> %d\n", i+1, s.Change, s.PolicyHint, s.BelowK)
		}
	}
	for _, n := range k.Notes {
		fmt.Fprintf(w, "  note: %s\n", n)
	}
}

// writeFindings prints findings, one per entry with its HDF5 place and fix.
func writeFindings(w io.Writer, fs []Finding, indent string) {
	for _, x := range fs {
		fmt.Fprintf(w, "%s- %s %s\n", indent, x.Path, x.What)
		if x.HDF5 != "" {
			fmt.Fprintf(w, "%s  in the file: %s\n", indent, x.HDF5)
		}
		fmt.Fprintf(w, "%s  %s\n", indent, x.Fix)
	}
}
