package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"muarc/archive"
	"muarc/archive/bagit"
	"muarc/internal/atomicfile"
)

func init() {
	var (
		out, manifest                 string
		asJSON, overwrite, allowParts bool
	)
	cmd := &cobra.Command{
		Use:   "merge-reports R1 R2 ... -o OUT",
		Short: "Combine the shard reports (and manifests) of a sharded run into one report and manifest",
		Long: `merge-reports combines the JSON shard reports that a run with --shard i/n wrote on
each machine (format "muarc-shard-report", see archive.ShardReport) into one
report at OUT, listing every file once. It checks the reports belong together
(same command, same shard count), that no shard is given twice and that a file
listed by two shards agrees. A missing shard makes the merge incomplete: nothing
is written and the exit code is 1, unless --allow-missing.

--manifest FILE also writes the SHA-256 of every ok file as manifest lines
"<sha256>  <path>" relative to the study folder, so that
cd STUDY && sha256sum -c FILE checks them. Inputs that are manifests (such
lines, e.g. from earlier merges or from sha256sum) are combined into that
manifest too; given manifests only, OUT is the merged manifest. A path with two
different sums is a problem. The merged report feeds the final
muarc pack DIR -o DEPOSIT --known OUT, which then does not hash again.`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if out == "" {
				return withExit(2, fmt.Errorf("give the output with -o OUT"))
			}
			var reps []*archive.ShardReport
			var repNames, manNames []string
			var mans [][]bagit.Entry
			for _, a := range args {
				data, err := os.ReadFile(a)
				if err != nil {
					return withExit(2, err)
				}
				if t := bytes.TrimSpace(data); len(t) > 0 && t[0] == '{' {
					r, err := archive.ParseShardReport(data, a)
					if err != nil {
						return withExit(2, err)
					}
					reps = append(reps, r)
					repNames = append(repNames, a)
					continue
				}
				es, err := bagit.ParseManifest(bytes.NewReader(data), a, 64)
				if err != nil {
					return withExit(2, fmt.Errorf("%w (not a shard report either: give JSON reports or sha256 manifests)", err))
				}
				mans = append(mans, es)
				manNames = append(manNames, a)
			}
			w := cmd.OutOrStdout()
			if len(reps) == 0 {
				// Manifests only: OUT is the merged manifest.
				es, problems := archive.MergeManifests(mans, manNames)
				for _, p := range problems {
					fmt.Fprintln(w, "problem:", p)
				}
				if len(problems) > 0 {
					return silentExit(1)
				}
				if err := atomicfile.WriteFile(out, bagit.FormatManifest(es), overwrite); err != nil {
					return withExit(2, err)
				}
				if asJSON {
					return printJSON(w, map[string]any{"complete": true, "entries": len(es), "output": out})
				}
				fmt.Fprintf(w, "%d manifests, %d entries: %s\n", len(mans), len(es), out)
				return nil
			}
			m := archive.MergeReports(reps, repNames)
			entries, problems := archive.MergeManifests(append([][]bagit.Entry{m.Report.ManifestEntries()}, mans...),
				append([]string{"the merged reports"}, manNames...))
			m.Problems = append(m.Problems, problems...)
			complete := len(m.Problems) == 0 && (len(m.Missing) == 0 || allowParts)
			if complete {
				var b bytes.Buffer
				enc := json.NewEncoder(&b)
				enc.SetIndent("", "  ")
				enc.SetEscapeHTML(false)
				if err := enc.Encode(m.Report); err != nil {
					return withExit(2, err)
				}
				if err := atomicfile.WriteFile(out, b.Bytes(), overwrite); err != nil {
					return withExit(2, err)
				}
				if manifest != "" {
					if err := atomicfile.WriteFile(manifest, bagit.FormatManifest(entries), overwrite); err != nil {
						return withExit(2, err)
					}
				}
			}
			if asJSON {
				v := map[string]any{"complete": complete, "missing": archiveStrings(m.Missing),
					"problems": archiveStrings(m.Problems), "summary": m.Report.Summary, "shards": m.Report.Shards}
				if complete {
					v["output"] = out
				}
				if err := printJSON(w, v); err != nil {
					return withExit(2, err)
				}
			} else {
				for _, p := range m.Problems {
					fmt.Fprintln(w, "problem:", p)
				}
				for _, s := range m.Missing {
					fmt.Fprintln(w, "missing shard:", s)
				}
				s := m.Report.Summary
				fmt.Fprintf(w, "%d shards, %d files (%d ok, %d refused, %d error, %d skipped), %d bytes\n",
					len(m.Report.Shards), s.Files, s.OK, s.Refused, s.Error, s.Skipped, s.Bytes)
				if complete {
					fmt.Fprintln(w, "merged report:", out)
					if manifest != "" {
						fmt.Fprintln(w, "manifest:", manifest)
					}
				} else {
					fmt.Fprintln(w, "incomplete: nothing written")
				}
			}
			if !complete || len(m.Missing) > 0 || m.Report.Summary.Refused+m.Report.Summary.Error > 0 {
				return silentExit(1)
			}
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVarP(&out, "output", "o", "", "merged report (JSON)")
	f.StringVar(&manifest, "manifest", "", "also write a sha256sum-style manifest of the ok files")
	f.BoolVar(&allowParts, "allow-missing", false, "write the merge even when shards are missing (still exit 1)")
	f.BoolVar(&overwrite, "overwrite", false, "replace existing outputs")
	f.BoolVar(&asJSON, "json", false, "print the outcome as JSON")
	rootCmd.AddCommand(cmd)
}

// walkSizes calls fn with the size of each regular file under dir.
func walkSizes(dir string, fn func(int64)) error {
	return filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return nil
		}
		if d.Type().IsRegular() {
			if info, err := d.Info(); err == nil {
				fn(info.Size())
			}
		}
		return nil
	})
}
