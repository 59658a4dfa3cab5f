package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"muarc/deid"
)

var keyFlags struct{ json bool }

var keyCmd = &cobra.Command{
	Use:   "key",
	Short: "Make or identify a study's secret key for keyed pseudonyms",
	Long: `A study key is 32 random bytes (64 hex digits in a file of mode 0600). muarc
deidentify derives every pseudonym and every date shift from it, so the same
key gives the same pseudonyms in every run; a new key gives new ones. The key
is never written into any output: files carry only its fingerprint.

Keep the key apart from the shared data, with the same care as the originals,
and back it up: without it, later recordings of the same people cannot get the
same pseudonyms.`,
}

var keyNewCmd = &cobra.Command{
	Use:   "new KEYFILE",
	Short: "Write a new random study key to KEYFILE (mode 0600; never overwrites)",
	Args:  cobra.ExactArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		k, err := deid.NewKeyFile(args[0])
		if err != nil {
			return withExit(2, err)
		}
		if keyFlags.json {
			return printJSON(cmd.OutOrStdout(), map[string]any{"key_file": args[0], "mode": "0600", "fingerprint": k.Fingerprint()})
		}
		fmt.Fprintf(cmd.OutOrStdout(), "wrote study key %s (mode 0600), fingerprint %s\n", args[0], k.Fingerprint())
		fmt.Fprintln(cmd.OutOrStdout(), "keep it apart from the shared data and back it up; it is never written into any output")
		return nil
	},
}

var keyFingerprintCmd = &cobra.Command{
	Use:   "fingerprint KEYFILE",
	Short: "Print the key's fingerprint (as recorded in de-identified files)",
	Args:  cobra.ExactArgs(1),
	RunE: func(cmd *cobra.Command, args []string) error {
		k, err := deid.LoadKey(args[0])
		if err != nil {
			return withExit(2, err)
		}
		if keyFlags.json {
			return printJSON(cmd.OutOrStdout(), map[string]any{"key_file": args[0], "fingerprint": k.Fingerprint()})
		}
		fmt.Fprintln(cmd.OutOrStdout(), k.Fingerprint())
		return nil
	},
}

func init() {
	keyCmd.PersistentFlags().BoolVar(&keyFlags.json, "json", false, "print the result as JSON")
	keyCmd.AddCommand(keyNewCmd, keyFingerprintCmd)
	rootCmd.AddCommand(keyCmd)
}
