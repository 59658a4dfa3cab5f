package main

import (
	"fmt"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"muarc/archive"
)

func init() {
	var (
		asJSON  bool
		workers int
		tmpDir  string
	)
	cmd := &cobra.Command{
		Use:   "verify DEPOSIT",
		Short: "Check a deposit: complete and valid BagIt bag, every recording valid, no bit rot",
		Long: `verify checks a deposit folder made by muarc pack (or any BagIt bag): that it is
complete and valid per RFC 8493 - bagit.txt, every payload file listed in every
manifest and matching its checksum, nothing unlisted, Payload-Oxum right, the tag
manifest right - and then that every recording under data/ validates and every
stored HDF5 chunk passes its Fletcher-32 checksum. Bit rot is reported by file
and, inside a recording, by dataset and chunk. A tar made with pack --tar is
unpacked into a temporary folder (--tmp, default the system's) and checked
there; its entries must be plain files and folders under one top folder.
A recording that bag-info.txt names under Accepted-Damage (pack
--accept-damaged) and whose bytes still match the manifests has its findings
listed as accepted at packing; they do not fail the deposit.
Exit 0 when nothing is found beyond such accepted damage, 1 on any other
finding, 2 when the deposit cannot be read.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			dir := args[0]
			st, err := os.Stat(dir)
			if err != nil {
				return withExit(2, err)
			}
			var rep *archive.DepositReport
			if !st.IsDir() {
				if !strings.HasSuffix(dir, ".tar") {
					return withExit(2, fmt.Errorf("%s: not a folder or a .tar; give the deposit made by muarc pack", dir))
				}
				bar := newProgress("verify", st.Size())
				rep, err = archive.VerifyTar(dir, tmpDir, archive.VerifyOptions{Workers: workers, Progress: bar.Add})
				bar.Finish()
			} else {
				bar := newProgress("verify", dirBytes(dir))
				rep, err = archive.VerifyDeposit(dir, archive.VerifyOptions{Workers: workers, Progress: bar.Add})
				bar.Finish()
			}
			if err != nil {
				return withExit(2, err)
			}
			w := cmd.OutOrStdout()
			if asJSON {
				if rep.Findings == nil {
					rep.Findings = []archive.Finding{}
				}
				if err := printJSON(w, map[string]any{"ok": rep.OK(), "report": rep}); err != nil {
					return withExit(2, err)
				}
			} else {
				for _, f := range rep.Findings {
					fmt.Fprintln(w, f)
				}
				verdict := "OK"
				if n := rep.Failing(); n > 0 {
					verdict = fmt.Sprintf("%d %s", n, pluralWord(n, "finding", "findings"))
				}
				if n := len(rep.Findings) - rep.Failing(); n > 0 {
					verdict += fmt.Sprintf(", %d %s on damage accepted at packing (bag-info.txt Accepted-Damage)", n, pluralWord(n, "finding", "findings"))
				}
				fmt.Fprintf(w, "%s: %s (%d payload files, %d bytes, %d recordings, %d chunks checked)\n",
					dir, verdict, rep.PayloadFiles, rep.PayloadBytes, rep.Recordings, rep.Chunks)
			}
			if !rep.OK() {
				return silentExit(1)
			}
			return nil
		},
	}
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.Flags().IntVar(&workers, "workers", 0, "files read at once (0: one per CPU)")
	cmd.Flags().StringVar(&tmpDir, "tmp", "", "folder to unpack a tar deposit in (default: the system's temporary folder)")
	rootCmd.AddCommand(cmd)
}

// dirBytes sums the sizes of the regular files under dir (for the progress
// total; errors just make the bar less exact).
func dirBytes(dir string) int64 {
	var n int64
	_ = walkSizes(dir, func(s int64) { n += s })
	return n
}
