package archive

import (
	"fmt"

	"muarc/schema"
)

func fmtSscan(s string, args ...any) (int, error) { return fmt.Sscan(s, args...) }

func schemaText() string { return schema.RecordingSchema }
