// Package convert reads the plain-text exports labs hold into muarc
// recordings and writes recordings back out as text.
//
// Readers (each streaming or small, each fuzzed):
//   - delimited signals (force, EMG): comma, semicolon, tab or blanks,
//     detected or given; a header or none; UCUM units in brackets or
//     parentheses; a time column in s or ms, a sample-number column, or
//     none with a rate; comment lines (#, %, //); a "key: value" block
//     above the table; UTF-8 BOM; CRLF; decimal commas; empty cells and NaN.
//     ScanSignals is the first pass (rows, time column, rate, gaps);
//     Signals.Source streams the samples in a second pass as a
//     record.SampleSource, parsing blocks on all cores.
//   - discharge times in four shapes (ReadDischarges), put on the EMG's
//     sample grid;
//   - unit tables (ReadUnitTable) with common header spellings;
//   - metadata sidecars in JSON or YAML (ReadSidecar), validated against
//     the recording JSON Schema with errors by JSON path and line;
//   - mapping profiles (LoadProfile, PROFILES.md).
//
// Read and ImportRecording put them together into one recording and
// stream it into a muarc file; Export writes a file back out as text.
//
// Lossless by rule: EMG samples are stored as float32 only when every cell
// reads back from float32 at the digits written, else as float64; force
// traces are float64; unit ids and discharges are integers. Reports say
// what was chosen, what was assumed and why.
//
// Metadata sidecars and unit tables may hold data about people. muarc helps
// de-identify (package deid); it does not certify. The ethics board, the
// consent given and local data-protection law decide what may be kept and
// shared.
package convert
