package archive

import (
	"encoding/json"
	"strings"
	"testing"

	"muarc/archive/bagit"
	"muarc/internal/batch"
)

func TestShardReportRoundTripAndChecks(t *testing.T) {
	sum := strings.Repeat("ab", 32)
	r := NewShardReport("pack", "/study", batch.Shard{I: 2, N: 3}, []FileRecord{
		{Path: "b.h5", Bytes: 10, MtimeNs: 5, SHA256: sum, Status: StatusOK},
		{Path: "a.h5", Bytes: 7, Status: StatusRefused, Identifying: []string{"subject.name"}},
	})
	data, _ := json.Marshal(r)
	back, err := ParseShardReport(data, "r.json")
	if err != nil {
		t.Fatal(err)
	}
	if back.Files[0].Path != "a.h5" || back.Summary.OK != 1 || back.Summary.Refused != 1 || back.Summary.Bytes != 10 || back.Shard != "2/3" {
		t.Fatalf("%+v", back)
	}
	for _, bad := range []string{
		`{"format":"other","format_version":1}`,
		`{"format":"muarc-shard-report","format_version":9}`,
		`{"format":"muarc-shard-report","format_version":1,"files":[{"path":"/abs","bytes":1}]}`,
		`{"format":"muarc-shard-report","format_version":1,"files":[{"path":"x","sha256":"XYZ"}]}`,
		"{\n  \"format\": \n}",
	} {
		if _, err := ParseShardReport([]byte(bad), "r.json"); err == nil || !strings.HasPrefix(err.Error(), "r.json") {
			t.Errorf("%s: %v", bad, err)
		}
	}
	// A syntax error is placed by line and column.
	_, err = ParseShardReport([]byte("{\n  \"format\": ]\n}"), "r.json")
	if err == nil || !strings.HasPrefix(err.Error(), "r.json:2:") {
		t.Errorf("syntax error position: %v", err)
	}
}

func TestMergeManifestsConflict(t *testing.T) {
	a, b := strings.Repeat("a", 64), strings.Repeat("b", 64)
	es, problems := MergeManifests([][]bagit.Entry{{{Path: "x", Sum: a}}, {{Path: "x", Sum: a}, {Path: "y", Sum: b}}}, []string{"m1", "m2"})
	if len(es) != 2 || len(problems) != 0 {
		t.Fatalf("%v %v", es, problems)
	}
	_, problems = MergeManifests([][]bagit.Entry{{{Path: "x", Sum: a}}, {{Path: "x", Sum: b}}}, []string{"m1", "m2"})
	if len(problems) != 1 || !strings.Contains(problems[0], "m2: x") {
		t.Fatalf("%v", problems)
	}
}

func TestCacheIgnoresTornLine(t *testing.T) {
	c := newFixityCache()
	sum := strings.Repeat("0", 64)
	in := `{"path":"a.h5","bytes":3,"mtime_ns":9,"sha256":"` + sum + `","status":"ok"}` + "\n" + `{"path":"b.h5","by`
	if err := c.loadFrom(strings.NewReader(in)); err != nil {
		t.Fatal(err)
	}
	if f, ok := c.get("a.h5", 3, 9); !ok || f.SHA256 != sum {
		t.Fatal("complete line not loaded")
	}
	if _, ok := c.get("a.h5", 3, 10); ok {
		t.Fatal("changed mtime still hits")
	}
	if len(c.m) != 1 {
		t.Fatalf("%d entries", len(c.m))
	}
}

func FuzzParseShardReport(f *testing.F) {
	r := NewShardReport("pack", "s", batch.Shard{I: 1, N: 2}, []FileRecord{{Path: "a.h5", Bytes: 1, SHA256: strings.Repeat("0", 64), Status: StatusOK}})
	b, _ := json.Marshal(r)
	f.Add(b)
	f.Add([]byte(`{"format":"muarc-shard-report","format_version":1,"files":[{"path":""}]}`))
	f.Add([]byte("{"))
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := ParseShardReport(data, "f")
		if err != nil {
			return
		}
		// What parses merges with itself without conflicts.
		m := MergeReports([]*ShardReport{r}, []string{"f"})
		for _, p := range m.Problems {
			if strings.Contains(p, "differs") {
				t.Fatalf("self-conflict: %s", p)
			}
		}
	})
}

func FuzzCacheLoad(f *testing.F) {
	f.Add(`{"path":"a.h5","bytes":3,"mtime_ns":9,"status":"ok"}` + "\n")
	f.Add("garbage\n{\n")
	f.Fuzz(func(t *testing.T, s string) {
		c := newFixityCache()
		if err := c.loadFrom(strings.NewReader(s)); err != nil {
			t.Fatal(err)
		}
		for k, v := range c.m {
			if k.path == "" || v.Path != k.path {
				t.Fatalf("bad entry %+v", v)
			}
		}
	})
}

func FuzzParseOrdered(f *testing.F) {
	f.Add(`{"a":1,"b":[true,null,"x"],"c":{"d":2.5}}`)
	f.Add(`[1,2`)
	f.Add(`{} extra`)
	f.Fuzz(func(t *testing.T, s string) {
		v, err := parseOrdered([]byte(s))
		if err != nil {
			return
		}
		// Whatever parses is valid JSON by encoding/json too.
		if !json.Valid([]byte(s)) {
			t.Fatalf("accepted invalid JSON %q as %v", s, v)
		}
	})
}
