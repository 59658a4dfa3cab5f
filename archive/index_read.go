package archive

import (
	"encoding/json"
	"path/filepath"

	"muarc/h5"
	"muarc/internal/batch"
	"muarc/internal/isolate"
	"muarc/recfile"
)

// Worker kinds (internal/isolate) for reading recordings of an index in
// worker processes: one round trip per recording, the worker kept.
const (
	kindSummary = "archive.summary"
	kindContent = "archive.content"
)

type readArg struct {
	Path string `json:"path"`
	Rel  string `json:"rel"`
	// Content asks for the content check too (one more open of the
	// file; only a catalogue needs it).
	Content bool `json:"content,omitempty"`
}

type readResult struct {
	Content string        `json:"content"`
	Summary summaryRecord `json:"summary"`
}

func init() {
	isolate.Register(kindSummary, func(raw json.RawMessage) (any, error) {
		var a readArg
		if err := json.Unmarshal(raw, &a); err != nil {
			return nil, err
		}
		s, c, err := summaryAndContent(a.Path, a.Rel, a.Content)
		if err != nil {
			return nil, err
		}
		return readResult{Content: c, Summary: recordOf(s)}, nil
	})
	isolate.Register(kindContent, func(raw json.RawMessage) (any, error) {
		var a readArg
		if err := json.Unmarshal(raw, &a); err != nil {
			return nil, err
		}
		return contentOf(a.Path)
	})
}

// summaryReader reads the recordings of one study folder, in this process
// or in worker processes.
type summaryReader struct {
	dir      string
	isolated bool
	content  bool // summary also returns the content check
}

func (r summaryReader) path(rel string) string { return filepath.Join(r.dir, filepath.FromSlash(rel)) }

// run calls job(0..n-1) on workers and returns the errors by index.
func (r summaryReader) run(n, workers int, job func(k int) error) []error {
	if n == 0 {
		return nil
	}
	return batch.Run(n, workers, job, nil)
}

// summary reads one recording's summary and its content check.
func (r summaryReader) summary(rel string) (*RecordingSummary, string, error) {
	if !r.isolated {
		return summaryAndContent(r.path(rel), rel, r.content)
	}
	pool, err := isolate.Default()
	if err != nil {
		return nil, "", err
	}
	var res readResult
	if err := pool.Call(kindSummary, readArg{Path: r.path(rel), Rel: rel, Content: r.content}, &res); err != nil {
		return nil, "", err
	}
	s := res.Summary.summary(rel, 0)
	return &s, res.Content, nil
}

// contentCheck reads one recording's content check.
func (r summaryReader) contentCheck(rel string) (string, error) {
	if !r.isolated {
		return contentOf(r.path(rel))
	}
	pool, err := isolate.Default()
	if err != nil {
		return "", err
	}
	var c string
	err = pool.Call(kindContent, readArg{Path: r.path(rel), Rel: rel}, &c)
	return c, err
}

// summaryAndContent reads a recording's summary and, when content, its
// content check (readSummary: one open of the file).
func summaryAndContent(path, rel string, content bool) (*RecordingSummary, string, error) {
	return readSummary(path, rel, content)
}

// contentOf reads the root attributes of a recording and returns its
// content check (rootContent).
func contentOf(path string) (string, error) {
	f, err := h5.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	return contentOfFile(f)
}

// contentOfFile is contentOf on an open file.
func contentOfFile(f *h5.File) (string, error) {
	root, err := f.Root()
	if err != nil {
		return "", err
	}
	defer root.Close()
	as, err := root.Attrs()
	if err != nil {
		return "", err
	}
	var digest string
	attrs := make([]rootAttr, 0, len(as))
	for _, a := range as {
		if a.Name == recfile.AttrMetadataSHA256 {
			digest, _ = a.Value.(string)
		}
		attrs = append(attrs, rootAttr{Name: a.Name, Type: a.Type, Value: a.Value})
	}
	return rootContent(digest, attrs), nil
}
