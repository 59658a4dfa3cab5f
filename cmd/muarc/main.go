// Command muarc archives, converts, validates, de-identifies and packs
// high-density surface EMG recordings and their motor-unit decompositions in
// the open muarc HDF5 layout (schema/LAYOUT.md).
//
// Each command lives in its own file, cmd_<verb>.go, and registers itself
// with the root command from an init function.
package main

import (
	"errors"
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"muarc/internal/atomicfile"
	"muarc/internal/isolate"
	"muarc/schema"
	"muarc/validate"
)

// rootCmd is the top of the command tree; each cmd_<verb>.go adds itself.
var rootCmd = &cobra.Command{
	Use:   "muarc",
	Short: "Open HDF5 archive tools for motor-unit studies with high-density surface EMG",
	Long: `muarc keeps force traces, raw EMG channels with electrode geometry, motor-unit
discharge times, per-unit quality figures and subject, session and provenance
metadata in one documented HDF5 layout, and converts, validates, de-identifies
and packs them for sharing.`,
	Version:       schema.SoftwareVersion,
	SilenceUsage:  true,
	SilenceErrors: true,
	// Shell completion scripts are not part of muarc's job.
	CompletionOptions: cobra.CompletionOptions{DisableDefaultCmd: true},
}

// exitError carries a process exit code with an error.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// withExit wraps err so that main exits with code (1 = findings or failures,
// 2 = could not read or bad usage).
func withExit(code int, err error) error {
	if err == nil {
		return nil
	}
	return &exitError{code, err}
}

// silentExit makes main exit with code without printing anything more (the
// command has already reported).
func silentExit(code int) error { return &exitError{code, errSilent} }

var errSilent = errors.New("")

func main() {
	// A worker process (internal/isolate) serves here and never returns.
	validate.ServeWorker()
	// Every validation in this program, whichever command asks for it, runs
	// in worker processes, so a file that crashes the HDF5 library is that
	// file's read error (validate.Isolated).
	validate.Validator = validate.Isolated
	// Temporary files left by interrupted runs are cleaned or listed.
	atomicfile.Notice = func(msg string) { fmt.Fprintln(os.Stderr, "muarc: note:", msg) }
	// Every recording this program opens in its own process is first read
	// in a worker (validate.Screen).
	validate.Screener = validate.Screen
	// A bad worker setting (MUARC_WORKER_TIME_LIMIT) stops the run before
	// any file is read, rather than reading files unprotected.
	if _, err := isolate.Default(); err != nil {
		fmt.Fprintln(os.Stderr, "muarc:", err)
		os.Exit(2)
	}
	err := rootCmd.Execute()
	if err == nil {
		return
	}
	code := 2 // usage errors from cobra, and anything not classified
	var ee *exitError
	if errors.As(err, &ee) {
		code = ee.code
	}
	// A full disk is never a finding about the inputs: exit 2 whatever the
	// command classified it as.
	var ns *atomicfile.NoSpaceError
	if errors.As(err, &ns) {
		code = 2
	}
	if !errors.Is(err, errSilent) {
		fmt.Fprintln(os.Stderr, "muarc:", err)
	}
	os.Exit(code)
}
