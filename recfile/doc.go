// Package recfile reads and writes one recording (record.Recording) in the
// muarc HDF5 layout, version 1 (schema/LAYOUT.md).
//
// Write streams each array's samples in bands of chunk height, so memory
// stays flat however long the recording; it writes to a temporary file
// beside the target and renames it into place only when everything is on
// disk. Open reads all metadata and the small datasets (force, channels,
// discharges, unit tables, MUAPs) and leaves samples in the file behind a
// SampleSource view. MetadataView builds the JSON view of the attributes
// that schema/recording.schema.json describes. Every file carries the
// metadata digest of layout 1.1 (AttrMetadataSHA256, CanonicalMetadata).
//
// Reading goes through the HDF5 C library in this process: a damaged file
// can crash it. validate.Screen and validate.Isolated are the safe entry
// points for files from untrusted places.
package recfile
