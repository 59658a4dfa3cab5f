package convert

import (
	"bufio"
	"errors"
	"fmt"
	"os"
	"strings"
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

// withExample fills in the line the error is about from its file when the
// reader that found it did not keep the text (the streaming samples path).
// The line is cut at 200 bytes; a file that cannot be read leaves it out.
func (e *ParseError) withExample() *ParseError {
	if e.Example != "" || e.Line <= 0 || e.File == "" {
		return e
	}
	f, err := os.Open(e.File)
	if err != nil {
		return e
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 64<<10), 64<<20)
	for n := 1; sc.Scan(); n++ {
		if n == e.Line {
			c := *e
			line := strings.TrimRight(strings.TrimPrefix(sc.Text(), "\ufeff"), "\r")
			if len(line) > 200 {
				line = strings.ToValidUTF8(line[:200], "") + "..."
			}
			c.Example = line
			return &c
		}
	}
	return e
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
