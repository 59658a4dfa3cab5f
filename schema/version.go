// Package schema holds the muarc layout specification (LAYOUT.md) and the
// JSON Schema of a recording's metadata view (recording.schema.json), both
// embedded in the binary, and the version constants readers and writers use.
package schema

import (
	_ "embed"
	"fmt"
	"strconv"
	"strings"
)

// LayoutName is the value of the root attribute "layout" in every muarc file.
const LayoutName = "muarc-recording"

// LayoutVersion is the layout version this build writes (major.minor). A
// reader accepts any minor version of its major version and refuses a newer
// major version.
const LayoutVersion = "1.2"

// SoftwareVersion is the version of the muarc software.
const SoftwareVersion = "0.1.0"

// Software is the software string written into files ("muarc 0.1.0").
const Software = "muarc " + SoftwareVersion

// Layout is the layout specification, Markdown.
//
//go:embed LAYOUT.md
var Layout string

// RecordingSchema is the JSON Schema (draft-07) of the metadata view.
//
//go:embed recording.schema.json
var RecordingSchema string

// ParseVersion splits "major.minor".
func ParseVersion(v string) (major, minor int, err error) {
	a, b, ok := strings.Cut(v, ".")
	major, err1 := strconv.Atoi(a)
	minor, err2 := strconv.Atoi(b)
	if !ok || err1 != nil || err2 != nil || major < 0 || minor < 0 {
		return 0, 0, fmt.Errorf("layout version %q is not major.minor", v)
	}
	return major, minor, nil
}

// CheckReadable returns nil when a file of layout version v can be read by
// this build, or an error saying why not and what to do.
func CheckReadable(v string) error {
	major, _, err := ParseVersion(v)
	if err != nil {
		return err
	}
	mine, _, _ := ParseVersion(LayoutVersion)
	if major > mine {
		return fmt.Errorf("layout version %s is newer than this muarc reads (%s); upgrade muarc to read it", v, LayoutVersion)
	}
	if major < 1 {
		return fmt.Errorf("layout version %s is not a released layout version", v)
	}
	return nil
}
