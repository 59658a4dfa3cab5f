// Package archive works on whole studies: it indexes a folder of muarc
// recordings (one row per recording, trial and array, from attributes only,
// kept in a catalogue beside them: CATALOGUE.md),
// writes the study tables, generates the data dictionary from the layout's
// JSON Schema, packs a deposit as a BagIt 1.0 bag (RFC 8493; package
// archive/bagit), optionally as one POSIX tar stream, verifies a deposit's
// fixity down to HDF5 chunks, and merges the reports of sharded runs.
//
// Deposits carry data about people. muarc helps de-identify; it does not
// certify anything: the ethics board, the consent given and local
// data-protection law decide what may be shared.
package archive
