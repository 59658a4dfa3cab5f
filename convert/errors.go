package convert

import (
	"errors"
	"fmt"
)

// ParseError is an input problem at a place in a text file. Line and Column
// are 1-based; 0 means not known (Column counts delimited fields, not bytes).
type ParseError struct {
	File   string `json:"file"`
	Line   int    `json:"line,omitempty"`
	Column int    `json:"column,omitempty"`
	Msg    string `json:"message"`
	// Hint says what to do about it.
	Hint string `json:"hint,omitempty"`
	// Example is the text of the line the error is about, as in the file.
	Example string `json:"example,omitempty"`
	// Choices are the options that pick each reading of an ambiguous file
	// (as command-line flags), when the error is that ambiguity.
	Choices []string `json:"choices,omitempty"`
}

func (e *ParseError) Error() string {
	s := e.File
	if e.Line > 0 {
		s += fmt.Sprintf(":%d", e.Line)
		if e.Column > 0 {
			s += fmt.Sprintf(":%d", e.Column)
		}
	}
	if s != "" {
		s += ": "
	}
	s += e.Msg
	if e.Example != "" {
		s += "; the line reads: " + e.Example
	}
	if e.Hint != "" {
		s += " (" + e.Hint + ")"
	}
	return s
}

// AsParseError returns the ParseError inside err, or nil.
func AsParseError(err error) *ParseError {
	var pe *ParseError
	if errors.As(err, &pe) {
		return pe
	}
	return nil
}

func perr(file string, line, col int, hint, format string, args ...any) *ParseError {
	return &ParseError{File: file, Line: line, Column: col, Msg: fmt.Sprintf(format, args...), Hint: hint}
}
