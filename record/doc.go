// Package record is the in-memory model of one muarc recording: one session
// of one subject, with one or more trials (contractions), each holding a force
// trace, one or more electrode arrays of raw EMG and the decompositions of
// those arrays into motor units.
//
// The model is plain Go. It does no file I/O; package recfile reads and
// writes it in the HDF5 layout described in schema/LAYOUT.md. Units are in
// field names or doc comments. A floating-point figure that is not known is
// NaN; a string that is not known is empty. Large EMG sample blocks are never
// required to sit in memory: an Array carries a SampleSource that is read in
// blocks.
//
// A struct field that holds a metadata field of the layout carries its
// registry name (schema.Fields) in a `layout:"name"` tag; internal/fieldbind
// uses the tags so the sidecar reader and writer and recfile walk the
// registry instead of spelling names.
package record
