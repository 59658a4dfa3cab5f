package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"muarc/archive"
	"muarc/internal/batch"
)

func init() {
	var (
		out, licence, shard                              string
		known                                            []string
		tarOut, allowIdent, acceptDamaged, asJSON, overw bool
		sha512                                           bool
		workers                                          int
	)
	cmd := &cobra.Command{
		Use:   "pack DIR -o DEPOSIT",
		Short: "Pack a study folder as a BagIt deposit (RFC 8493) with tables, data dictionary and README",
		Long: `pack makes a deposit of the muarc recordings (*.h5, *.hdf5) under DIR: a BagIt 1.0
bag (RFC 8493) with the recordings in data/recordings/, the study tables
(data/tables/subjects.tsv, recordings.tsv), a data dictionary of every metadata
field (data/data-dictionary.md and .tsv), the layout document (data/layout.md) and
a README with a citation block and the licence; manifest-sha256.txt,
bag-info.txt (Bagging-Date, Payload-Oxum, Contact-*, External-Description from
the study metadata) and tagmanifest-sha256.txt; --sha512 adds SHA-512
manifests beside them (each file is still read once).

Each recording must validate without errors and carry no identifying fields
(run muarc deidentify first); otherwise nothing is written and the refused files
are listed (exit 1). --allow-identified packs them anyway and marks the bag
(bag-info.txt: Identifying-Data) - for closed, non-public use only. muarc helps
de-identify; it does not certify: the ethics board, the consent given and local
data-protection law decide what may be shared.

A recording whose bytes are damaged (a chunk checksum, the HDF5 structure or
the metadata digest fails) is refused with what failed; --accept-damaged packs
one whose only errors are such damage as it is, with an Accepted-Damage line
per file in bag-info.txt. A file that cannot be read at all is always refused.

The bag is built in .DEPOSIT.partial beside DEPOSIT and renamed into place when
complete. An interrupted run, started again with the same arguments, continues:
the staging folder's .pack-cache.jsonl (path, size, modification time, SHA-256,
check results; one JSON line per file) lets it skip the checks and the copy of
unchanged files; every staged copy it reuses is hashed again, and one whose
sums no longer match is copied again. Delete the staging folder to start over.
A full disk stops the run (exit 2) with what was staged kept.

--tar writes one POSIX tar (ustar; pax where a name needs it) instead of a
folder, hashing while it streams; -o - streams it to standard output.

--shard i/n checks and hashes only shard i of n of the recordings, in place,
and writes a shard report (JSON) to -o; combine the reports with
muarc merge-reports and give the merged report to the final run with --known,
which then copies without checking again the files whose path, size and
modification time match (the copy is hashed, and a file whose sums differ from
the report's is checked again).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if out == "" {
				return withExit(2, fmt.Errorf("give the output with -o DEPOSIT"))
			}
			sh, err := batch.ParseShard(shard)
			if err != nil {
				return withExit(2, err)
			}
			if sh.N > 1 && tarOut {
				return withExit(2, fmt.Errorf("--shard writes a shard report, not a bag; leave out --tar"))
			}
			opt := archive.PackOptions{Licence: licence, AllowIdentified: allowIdent, AcceptDamaged: acceptDamaged, Workers: workers,
				Shard: sh, Tar: tarOut, Overwrite: overw, SHA512: sha512}
			for _, k := range known {
				r, err := archive.ReadShardReport(k)
				if err != nil {
					return withExit(2, err)
				}
				opt.Known = append(opt.Known, r)
			}
			if tarOut && out == "-" {
				opt.TarTo = os.Stdout
				if asJSON {
					return withExit(2, fmt.Errorf("-o - streams the tar to standard output; --json cannot share it"))
				}
			}
			var bar *progress
			opt.Progress = func(n, total int64) {
				if bar == nil {
					bar = newProgress("pack", total)
				}
				bar.Add(n)
			}
			res, err := archive.Pack(args[0], out, opt)
			bar.Finish()
			w := cmd.OutOrStdout()
			if opt.TarTo != nil {
				w = os.Stderr
			}
			if res != nil {
				if asJSON {
					if res.Files == nil {
						res.Files = []archive.FileRecord{}
					}
					v := map[string]any{"result": res, "ok": err == nil}
					if err != nil {
						v["error"] = err.Error()
					}
					if perr := printJSON(w, v); perr != nil {
						return withExit(2, perr)
					}
				} else {
					printPack(w, res, sh)
				}
			}
			if err != nil {
				code := 2
				if errors.Is(err, archive.ErrRefused) {
					code = 1
				}
				if asJSON {
					return silentExit(code)
				}
				return withExit(code, err)
			}
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVarP(&out, "output", "o", "", "deposit folder, tar file (--tar; - for stdout) or shard report (--shard)")
	f.BoolVar(&tarOut, "tar", false, "write the bag as one POSIX tar")
	f.StringVar(&licence, "licence", "", "SPDX licence of the deposit (default: the recordings' study licence)")
	f.BoolVar(&allowIdent, "allow-identified", false, "pack recordings that still carry identifying fields, and mark the bag so")
	f.BoolVar(&acceptDamaged, "accept-damaged", false, "pack recordings whose only errors are integrity damage (chunk checksums, structure, metadata digest) as they are, named in bag-info.txt")
	f.IntVar(&workers, "workers", 0, "files checked and hashed at once (0: one per CPU)")
	f.StringVar(&shard, "shard", "", "check and hash only shard i/n (e.g. 3/8) and write a shard report")
	f.StringArrayVar(&known, "known", nil, "merged shard report whose hashes and checks to reuse (repeatable)")
	f.BoolVar(&sha512, "sha512", false, "also write SHA-512 manifests (manifest-sha512.txt, tagmanifest-sha512.txt)")
	f.BoolVar(&overw, "overwrite", false, "replace an existing output")
	f.BoolVar(&asJSON, "json", false, "print the result as JSON")
	rootCmd.AddCommand(cmd)
}

func printPack(w io.Writer, res *archive.PackResult, sh batch.Shard) {
	for _, f := range res.Files {
		switch f.Status {
		case archive.StatusRefused, archive.StatusError:
			fmt.Fprintf(w, "%s: %s: %s\n", f.Status, f.Path, f.Message)
		case archive.StatusSkipped:
			fmt.Fprintf(w, "skipped: %s: %s\n", f.Path, f.Message)
		}
	}
	for _, n := range res.Notes {
		fmt.Fprintln(w, "note:", n)
	}
	mb := float64(res.HashedBytes) / 1e6
	switch {
	case res.Output == "":
		fmt.Fprintf(w, "nothing written (%d recordings hashed, %d reused)\n", res.Hashed, res.Reused)
	case sh.N > 1:
		fmt.Fprintf(w, "shard %s: %d recordings checked and hashed (%.1f MB) in %.1f s, %d reused; report %s\n",
			sh, res.Hashed, mb, res.HashSeconds, res.Reused, res.Output)
	default:
		fmt.Fprintf(w, "deposit %s: %d payload files, %d bytes; %d recordings checked, copied and hashed (%.1f MB) in %.1f s, %d reused; licence %s\n",
			res.Output, res.PayloadFiles, res.PayloadBytes, res.Hashed, mb, res.HashSeconds, res.Reused, res.Licence)
		if res.Identified {
			fmt.Fprintln(w, "marked in bag-info.txt as carrying identifying data (--allow-identified): not for public deposit")
		}
		for _, f := range res.Files {
			if f.Status == archive.StatusOK && len(f.Damage) > 0 {
				fmt.Fprintf(w, "packed although damaged (--accept-damaged), named in bag-info.txt: %s: %s\n", f.Path, strings.Join(f.Damage, "; "))
			}
		}
	}
}
