package recfile

import (
	"errors"
	"fmt"

	"muarc/h5"
)

// ErrChecksum marks data whose stored Fletcher-32 checksum does not match.
var ErrChecksum = h5.ErrChecksum

// ErrNewerLayout marks a file written in a newer major layout version.
var ErrNewerLayout = errors.New("newer layout version")

// ErrInvalid marks a recording the writer refuses (the layout cannot hold it).
var ErrInvalid = errors.New("invalid recording")

// FormatError is a file that does not follow the layout: where (file and
// HDF5 path), what is wrong, and what to do about it.
type FormatError struct {
	File   string
	Object string
	Msg    string
	Hint   string
	err    error
}

func (e *FormatError) Error() string {
	s := e.File + ": " + e.Object + ": " + e.Msg
	if e.Hint != "" {
		s += " (" + e.Hint + ")"
	}
	return s
}

// Unwrap exposes ErrNewerLayout where it applies.
func (e *FormatError) Unwrap() error { return e.err }

func formatErr(file, object, hint, msg string, args ...any) *FormatError {
	return &FormatError{File: file, Object: object, Msg: fmt.Sprintf(msg, args...), Hint: hint}
}

// invalid reports a recording the writer cannot store.
func invalid(where, msg string, args ...any) error {
	return fmt.Errorf("%w: %s: %s", ErrInvalid, where, fmt.Sprintf(msg, args...))
}
