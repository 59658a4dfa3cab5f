package main

import (
	"fmt"

	"muarc/analysis"
	"muarc/validate"
)

// checkRecordingInput checks that path is a regular file and reads it once
// in a worker process (validate.Screener) before this process opens it:
// a file that crashes the HDF5 library is then reported with its path and
// the reason (exit 2) instead of ending muarc with a crash dump. samples
// says whether the command will read the samples (the chunk index is then
// read too).
func checkRecordingInput(path string, samples bool) error {
	if err := analysis.CheckInputFile(path); err != nil {
		return err
	}
	if err := validate.ScreenFirst(path, samples); err != nil {
		return fmt.Errorf("%s: could not read: %w", path, err)
	}
	return nil
}
