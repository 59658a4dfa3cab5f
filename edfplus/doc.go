// Package edfplus reads and writes the European Data Format for biosignals:
// EDF (16-bit samples), EDF+ (EDF with annotations and a structured
// patient and recording field), BDF (24-bit samples) and BDF+ (BDF with
// the EDF+ rules). It knows nothing about recordings: a file is a header,
// a sequence of data records holding each signal's digital samples, and
// time-stamped annotation lists (TAL, EDF+ specification section 2.2).
//
// Reading is strict: every header field is checked and a bad one is
// refused with a *HeaderError naming the byte offset and the field. Data
// records stream one at a time into buffers the caller reuses, so memory
// stays flat whatever the file's length. Physical values are
// digital*Scale()+Offset() of each signal; digital values are exact.
//
// References: "European Data Format, full specification of EDF" (Kemp et
// al. 1992), "EDF+ specification" sections 2.1 (header) and 2.2
// (annotations, TAL), and the BDF (24-bit) variant.
package edfplus
