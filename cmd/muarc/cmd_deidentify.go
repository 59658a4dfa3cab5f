package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"muarc/deid"
	"muarc/internal/batch"
)

var deidFlags struct {
	out, key, policy, shard, linkage, check, original, shardReport string
	needles                                                        []string
	workers, k                                                     int
	json, dryRun, overwrite, printPolicy, acceptDamaged            bool
}

var deidentifyCmd = &cobra.Command{
	Use:   "deidentify SOURCE_DIR -o OUT_DIR --key KEYFILE | FILE -o OUT.h5 --key KEYFILE | --check FILE",
	Short: "Write de-identified copies of recordings and prove no identifying value is left in their bytes",
	Long: `deidentify writes a fresh, de-identified copy of every muarc file under
SOURCE_DIR into OUT_DIR (or of one FILE into OUT.h5). The inputs are never
changed. A policy (YAML or JSON; --print-policy shows the built-in one, which
follows the HIPAA Safe Harbor list of 18 identifier kinds, 45 CFR
164.514(b)(2)) says per metadata field: keep, drop, pseudonymize, generalize,
shift, year or scrub. Fields the policy does not name are dropped and listed.
The built-in policy also drops the text columns of unit tables and replaces
channel labels that are not plain electrode codes (e12, ch3, r2c5) by their
grid position.

Pseudonyms are HMAC-SHA-256 of the original ids under the study key (muarc key
new KEYFILE); dates move by a per-subject offset of whole days, the same in
all of that subject's files. Outputs are named by pseudonyms. Signals,
discharges and unit figures are carried bit-exact (compared by SHA-256 after
writing); EMG samples already stored as muarc stores them are copied chunk
by chunk, never decoded, and compared byte for byte.

Every string an output will hold (attributes, labels, columns, group names,
provenance) is searched for the original identifying values before anything
is written, and the written bytes again before the file is published: names,
ids, contact details, dates in their common spellings, the words of dropped
free text, also inside longer tokens (Hallbeck01), in UTF-8 and UTF-16. Words
of the layout and of English (a subject called Hand or Mass) are not searched
on their own. A file that fails is not written; the report names each field,
where it sits in the file, and the policy line that fixes it. --dry-run runs
the same checks and writes nothing. The key, the policy and the --linkage
folder are checked before anything is written.

Every source is validated first (chunk checksums, structure, the metadata
digest; the EMG samples' chunk checksums as they are copied): a damaged
source is refused with what is damaged, since a copy would carry the damage
under a new, clean checksum. --accept-damaged
de-identifies it as read and records that in the output's history.

--check FILE checks a file meant for sharing (with --original, against the
file it was made from; --needle adds values to search for). A run's report
ends with a k-anonymity table over the quasi-identifiers kept.

muarc helps de-identify; it does not certify. The ethics board, the consent
given and local data-protection law decide what may be shared. A face
photograph, a voice recording or a rare diagnosis in any attachment can
identify a person too. deid/POLICY.md explains every rule.

Exit status: 0 all written (or check clean), 1 a file failed or the check
found something, 2 bad usage or an input could not be read.`,
	Args: func(cmd *cobra.Command, args []string) error {
		switch {
		case deidFlags.printPolicy:
			return nil
		case deidFlags.check != "":
			if len(args) != 0 {
				return fmt.Errorf("--check takes the file as its value; give no other arguments")
			}
			return nil
		case len(args) != 1:
			return fmt.Errorf("give one SOURCE_DIR or FILE, -o and --key")
		case deidFlags.out == "":
			return fmt.Errorf("give the output with -o (a folder for SOURCE_DIR, a .h5 file for FILE)")
		case deidFlags.key == "":
			return fmt.Errorf("give the study key with --key (make one with `muarc key new KEYFILE`)")
		}
		return nil
	},
	RunE: runDeidentify,
}

func init() {
	f := deidentifyCmd.Flags()
	f.StringVarP(&deidFlags.out, "output", "o", "", "output `folder` (for SOURCE_DIR) or file (for FILE)")
	f.StringVar(&deidFlags.key, "key", "", "study key `KEYFILE` (muarc key new KEYFILE)")
	f.StringVar(&deidFlags.policy, "policy", "", "policy `FILE` (YAML or JSON); default: the built-in Safe Harbor policy")
	f.IntVar(&deidFlags.workers, "workers", 0, "files done at once (0: one per CPU)")
	f.StringVar(&deidFlags.shard, "shard", "", "do only shard `i/n` of the sorted file list (cluster job arrays)")
	f.StringVar(&deidFlags.shardReport, "shard-report", "", "also write this run's shard report (muarc-shard-report JSON) to `FILE`, for muarc merge-reports")
	f.BoolVar(&deidFlags.json, "json", false, "print the report as JSON")
	f.BoolVar(&deidFlags.dryRun, "dry-run", false, "run every check and print the plan (every field and what the policy does to it), writing nothing")
	f.StringVar(&deidFlags.linkage, "linkage", "", "also write a private linkage `FILE` (original id -> pseudonym), mode 0600, outside the output folder")
	f.IntVar(&deidFlags.k, "k", 0, "group size for the k-anonymity report (default: the policy's k, 5 in the built-in policy)")
	f.BoolVar(&deidFlags.overwrite, "overwrite", false, "replace existing output files")
	f.BoolVar(&deidFlags.acceptDamaged, "accept-damaged", false, "de-identify sources that fail their integrity checks (chunk checksums, structure, metadata digest) as they read; recorded in each output's history")
	f.StringVar(&deidFlags.check, "check", "", "check `FILE` for identifying values instead of de-identifying")
	f.StringVar(&deidFlags.original, "original", "", "with --check: the `FILE` it was made from, whose identifying values are searched for")
	f.StringArrayVar(&deidFlags.needles, "needle", nil, "with --check: a further `VALUE` to search for (repeatable)")
	f.BoolVar(&deidFlags.printPolicy, "print-policy", false, "print the built-in policy (a start for a study's own) and exit")
	rootCmd.AddCommand(deidentifyCmd)
}

func runDeidentify(cmd *cobra.Command, args []string) error {
	out := cmd.OutOrStdout()
	if deidFlags.printPolicy {
		_, err := out.Write(deid.DefaultPolicyJSON())
		return err
	}
	var pol *deid.Policy
	if deidFlags.policy != "" {
		p, err := deid.LoadPolicy(deidFlags.policy)
		if err != nil {
			return withExit(2, err)
		}
		pol = p
	}
	if deidFlags.check != "" {
		return runDeidCheck(out, pol)
	}
	key, err := deid.LoadKey(deidFlags.key)
	if err != nil {
		return withExit(2, err)
	}
	shard, err := batch.ParseShard(deidFlags.shard)
	if err != nil {
		return withExit(2, err)
	}
	src := args[0]
	fi, err := os.Stat(src)
	if err != nil {
		return withExit(2, err)
	}
	var bar *progress
	opt := deid.StudyOptions{Policy: pol, Key: key, Workers: deidFlags.workers, Shard: shard,
		DryRun: deidFlags.dryRun, Overwrite: deidFlags.overwrite, AcceptDamaged: deidFlags.acceptDamaged, Linkage: deidFlags.linkage, K: deidFlags.k,
		Progress: func(done, total int) {
			if bar == nil {
				bar = newProgress("deidentify", int64(total))
			}
			bar.Add(1)
		}}
	var rep *deid.StudyReport
	if fi.IsDir() {
		rep, err = deid.DeidentifyStudy(src, deidFlags.out, opt)
	} else {
		if shard.N > 1 {
			return withExit(2, fmt.Errorf("--shard applies to a folder, not to one file"))
		}
		if st, e := os.Stat(deidFlags.out); e == nil && st.IsDir() {
			return withExit(2, fmt.Errorf("%s: a folder; for one FILE give the output file name, e.g. -o %s", deidFlags.out, filepath.Join(deidFlags.out, "shared.h5")))
		}
		rep, err = deid.DeidentifyFile(src, deidFlags.out, opt)
	}
	bar.Finish()
	if err != nil {
		if rep != nil && !deidFlags.json {
			rep.WriteText(out, deidFlags.out)
		}
		return withExit(2, err)
	}
	if deidFlags.shardReport != "" && !rep.DryRun {
		source := src
		if !fi.IsDir() {
			source = filepath.Dir(src)
		}
		files := make([]shardFile, len(rep.Files))
		for i, o := range rep.Files {
			files[i] = shardFile{Path: filepath.Join(source, o.Input), Err: o.Error}
		}
		if err := writeShardReport(deidFlags.shardReport, "deidentify", source, shard, files); err != nil {
			return withExit(2, err)
		}
	}
	if deidFlags.json {
		if err := printJSON(out, rep); err != nil {
			return err
		}
	} else {
		rep.WriteText(out, deidFlags.out)
	}
	if err := rep.NoSpace(); err != nil {
		return withExit(2, err)
	}
	if rep.Failed > 0 {
		return silentExit(1)
	}
	return nil
}

func runDeidCheck(out io.Writer, pol *deid.Policy) error {
	rep, err := deid.CheckFile(deidFlags.check, deid.CheckOptions{Original: deidFlags.original, Policy: pol, Needles: deidFlags.needles})
	if err != nil {
		return withExit(2, err)
	}
	if deidFlags.json {
		if err := printJSON(out, rep); err != nil {
			return err
		}
	} else {
		rep.WriteText(out)
	}
	if !rep.OK() {
		return silentExit(1)
	}
	return nil
}
