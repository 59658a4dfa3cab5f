package convert

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/recfile"
)

// TestProfileMapsFilesChannelsAndColumns: a lab layout with semicolons,
// decimal commas, millisecond times, channels placed on a grid by the
// profile and unit-table headers named by it.
func TestProfileMapsFilesChannelsAndColumns(t *testing.T) {
	dir := t.TempDir()
	rec := filepath.Join(dir, "P07")
	os.MkdirAll(filepath.Join(rec, "level30"), 0o755)
	write := func(rel, text string) {
		if err := os.WriteFile(filepath.Join(rec, filepath.FromSlash(rel)), []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write("session.yaml", "study: {id: ST}\nsubject: {id: P07}\nsession: {date: 2026-03-14}\ntrials:\n  - name: level30\n    target_pct_mvc: 30\n")
	write("level30/Kraft.txt", "Zeit [ms];Kraft [N]\n0;1,5\n1;1,75\n2;2\n3;2,25\n")
	write("level30/vastus.txt", "Zeit [ms];E01 [uV];E02 [uV];Trigger [V];E03 [uV]\n0;1,5;2;0;3\n1;1;2;5;3\n2;1;2;0;3\n3;1;2;0;3\n")
	write("level30/vastus-auto-spikes.txt", "MU1;MU2\n1;2\n3;\n")
	write("level30/vastus-auto-quality.txt", "MU;Qual;Rekrutierung [%MVC];Tiefe [mm]\nMU1;0,91;12,5;8\nMU2;0,85;20;11\n")
	prof := filepath.Join(dir, "lab.yaml")
	os.WriteFile(prof, []byte(`name: lab
files:
  metadata: session.yaml
  force: "{trial}/Kraft.txt"
  emg: "{trial}/{array}.txt"
  discharges: "{trial}/{array}-{decomposition}-spikes.txt"
  units: "{trial}/{array}-{decomposition}-quality.txt"
signals: {delimiter: semicolon, decimal_comma: "yes", rate_hz: 1000}
emg:
  skip: [Trigger]
  columns: {E03: R2C1}
  channels:
    E01: {row: 0, column: 0}
    E02: {row: 0, column: 1}
    R2C1: {row: 1, column: 0, usable: false}
discharges: {shape: columns, time_base: ms}
units:
  columns: {Qual: silhouette, Rekrutierung: recruit_pct_mvc}
`), 0o644)
	p, err := LoadProfile(prof)
	if err != nil {
		t.Fatal(err)
	}
	recs, err := FindRecordings(dir, p)
	if err != nil || len(recs) != 1 {
		t.Fatalf("%v %v", err, recs)
	}
	// The EMG template "{trial}/{array}.txt" also matches Kraft.txt; force
	// comes first, so it is not taken as an array.
	if len(recs[0].Inputs.EMG) != 1 || len(recs[0].Inputs.Force) != 1 {
		t.Fatalf("%+v", recs[0].Inputs)
	}
	out := filepath.Join(dir, "p07.h5")
	if _, err := ImportRecording(recs[0].Inputs, out, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	r, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	tr := r.Trials[0]
	a := tr.Arrays[0]
	if tr.Name != "level30" || tr.TargetPctMVC != 30 || tr.Force.SamplingRateHz != 1000 || tr.Force.Values[1] != 1.75 || a.Name != "vastus" {
		t.Fatalf("%+v", tr)
	}
	if c := a.Channels[2]; len(a.Channels) != 3 || c.Label != "R2C1" || c.Row != 1 || c.Column != 0 || c.Usable || a.Channels[1].Column != 1 {
		t.Fatalf("%+v", a.Channels)
	}
	v := make([]float32, 12)
	if err := a.Samples.ReadFloat32(0, v); err != nil {
		t.Fatal(err)
	}
	if v[0] != 1.5 || v[3] != 1 || v[5] != 3 {
		t.Fatalf("samples %v (trigger column must be left out)", v)
	}
	d := a.Decompositions[0]
	if d.Name != "auto" || len(d.Units) != 2 || d.Units[0].Discharges[1] != 3 || d.Units[0].Silhouette != 0.91 || d.Units[1].RecruitPctMVC != 20 {
		t.Fatalf("%+v", d)
	}
	if len(d.ExtraColumns) != 1 || d.ExtraColumns[0].Name != "tiefe" || d.ExtraColumns[0].Unit != "mm" || d.ExtraColumns[0].Values[1] != 11 {
		t.Fatalf("%+v", d.ExtraColumns)
	}
	names := ""
	for _, s := range r.Provenance.Sources {
		names += s.Role + ":" + s.Name + " "
		// SHA-256 (FIPS 180-4) as coreutils' sha256sum computes it.
		if s.Role == "emg" {
			out, err := exec.Command("sha256sum", filepath.Join(rec, s.Name)).Output()
			if err != nil {
				if os.Getenv("CI") != "" {
					t.Fatalf("sha256sum: %v", err)
				}
				t.Logf("no sha256sum: %v", err)
			} else if st, _ := os.Stat(filepath.Join(rec, s.Name)); strings.Fields(string(out))[0] != s.SHA256 || st.Size() != s.Bytes {
				t.Fatalf("source %s: sha %s bytes %d, sha256sum %s", s.Name, s.SHA256, s.Bytes, out)
			}
		}
	}
	if !strings.Contains(names, "emg:level30/vastus.txt") || !strings.Contains(names, "profile:lab.yaml") || len(r.Provenance.Sources[0].SHA256) != 64 {
		t.Fatalf("%s", names)
	}
}
