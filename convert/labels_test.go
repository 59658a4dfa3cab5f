package convert

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"muarc/recfile"
)

// TestLabelsImportedStoredAndExported imports discharges and a unit table
// whose labels a number reader would change ("MU 07", "1.5", "2.0", a
// quoted label holding the delimiter), checks the stored labels, ids 1..N
// and figures matched by label, then exports the discharges in every shape
// and time base and reads each export back with detection: the same labels
// and discharges, or (never silently) a refusal.
func TestLabelsImportedStoredAndExported(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("time [s],c1 [uV]\n")
	for i := 0; i < 2048*3; i++ {
		fmt.Fprintf(&b, "%.6f,%d\n", float64(i)/2048, i%7)
	}
	emg := filepath.Join(dir, "emg_grid.csv")
	os.WriteFile(emg, []byte(b.String()), 0o644)
	dis := filepath.Join(dir, "discharges_grid_auto.csv")
	os.WriteFile(dis, []byte("unit,time [s]\nMU 07,0.5\nMU 07,0.75\n1.5,1\n2.0,1.25\n2.0,1.5\n\"x,y\",2\n"), 0o644)
	units := filepath.Join(dir, "units_grid_auto.csv")
	os.WriteFile(units, []byte("unit,SIL\n2.0,0.8\nMU 07,0.9\n"), 0o644)
	out := filepath.Join(dir, "r.h5")
	if _, err := ImportRecording(Inputs{Dir: dir, EMG: []string{emg}, Discharges: []string{dis}, Units: []string{units}}, out, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	r, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	d := r.Trials[0].Arrays[0].Decompositions[0]
	// 0.5 s * 2048 = 1024, 0.75 s = 1536, 1 s = 2048, 1.25 s = 2560, ...
	want := []struct {
		label string
		dis   []int64
		sil   float64
	}{{"MU 07", []int64{1024, 1536}, 0.9}, {"1.5", []int64{2048}, -1}, {"2.0", []int64{2560, 3072}, 0.8}, {"x,y", []int64{4096}, -1}}
	if len(d.Units) != len(want) {
		t.Fatalf("%d units", len(d.Units))
	}
	for i, w := range want {
		u := d.Units[i]
		if u.ID != int64(i+1) || u.Label != w.label || fmt.Sprint(u.Discharges) != fmt.Sprint(w.dis) || (w.sil >= 0 && u.Silhouette != w.sil) {
			t.Errorf("unit %d: id %d label %q %v SIL %v, want %q %v %v", i, u.ID, u.Label, u.Discharges, u.Silhouette, w.label, w.dis, w.sil)
		}
	}
	g := Grid{RateHz: 2048, Samples: 2048 * 3}
	for _, shape := range []string{ShapeLong, ShapeLines, ShapeColumns, ShapeMatrix} {
		for _, tb := range []string{"samples", "s"} {
			if shape == ShapeMatrix && tb == "s" {
				continue
			}
			ed := filepath.Join(dir, "export-"+shape+"-"+tb)
			files, err := Export(out, []string{"discharges"}, ExportOptions{Dir: ed, Shape: shape, TimeBase: tb})
			if err != nil || len(files) != 1 {
				t.Fatalf("%s %s: %v %v", shape, tb, err, files)
			}
			dc, err := ReadDischarges(files[0], g, DischargeOptions{FirstIndex: -1})
			if err != nil {
				text, _ := os.ReadFile(files[0])
				t.Errorf("%s %s: export not read back: %v\n%s", shape, tb, err, text)
				continue
			}
			for i, w := range want {
				if i >= len(dc.Units) || dc.Units[i].Label != w.label || fmt.Sprint(dc.Units[i].Discharges) != fmt.Sprint(w.dis) {
					t.Errorf("%s %s: read back %+v", shape, tb, dc.Units)
					break
				}
			}
		}
	}
}
