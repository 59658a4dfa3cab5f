package recfile

import (
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/h5"
	"muarc/internal/reftest"
)

func needTool(t *testing.T, name, pkg string) string { return reftest.NeedTool(t, name, pkg) }

// TestH5dumpListsDocumentedGroups checks the header listing of h5dump
// (Debian hdf5-tools), the HDF5 project's own reader, against the groups
// and datasets LAYOUT.md documents.
func TestH5dumpListsDocumentedGroups(t *testing.T) {
	h5dump := needTool(t, "h5dump", "hdf5-tools")
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := Write(path, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(h5dump, "-H", path).CombinedOutput()
	if err != nil {
		t.Fatalf("h5dump: %v\n%s", err, out)
	}
	s := string(out)
	for _, want := range []string{
		`GROUP "study"`, `GROUP "subject"`, `GROUP "session"`, `GROUP "trials"`, `GROUP "ramp_30"`,
		`GROUP "arrays"`, `GROUP "ta_grid"`, `DATASET "samples"`, `GROUP "channels"`, `DATASET "label"`,
		`GROUP "decompositions"`, `GROUP "auto"`, `GROUP "units"`, `DATASET "discharges"`,
		`DATASET "discharge_offsets"`, `DATASET "muaps"`, `DATASET "force"`, `DATASET "force_target"`,
		`GROUP "provenance"`, `GROUP "sources"`, `GROUP "history"`,
		`ATTRIBUTE "layout_version"`, `ATTRIBUTE "sampling_rate_hz"`,
		`DATATYPE  H5T_IEEE_F32LE`, `DATASPACE  SIMPLE { ( 9000, 6 ) / ( H5S_UNLIMITED, 6 ) }`,
		`CSET H5T_CSET_UTF8`,
	} {
		if !strings.Contains(s, want) {
			t.Errorf("h5dump -H lacks %s", want)
		}
	}
}

// TestFlippedSampleByteIsAChecksumError flips one byte inside a stored
// samples chunk: muarc's reader must fail with ErrChecksum, never return
// the damaged values, and h5.VerifyChunks must name the chunk. h5dump, the
// reference reader, must fail on the same dataset.
func TestFlippedSampleByteIsAChecksumError(t *testing.T) {
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := Write(path, fixture(), WriteOptions{ChunkRows: 1024, ChunkCols: 4}); err != nil {
		t.Fatal(err)
	}
	hf, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	root, _ := hf.Root()
	ds, err := root.OpenDataset("trials/ramp_30/arrays/ta_grid/samples", 0)
	if err != nil {
		t.Fatal(err)
	}
	chunks, err := ds.Chunks()
	ds.Close()
	root.Close()
	hf.Close()
	if err != nil || len(chunks) != 9*2 {
		t.Fatalf("chunks: %d %v", len(chunks), err)
	}
	victim := chunks[5]
	raw, _ := os.ReadFile(path)
	raw[victim.Addr+int64(victim.Bytes/2)] ^= 0x01
	if err := os.WriteFile(path, raw, 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	a := f.Recording().Trials[0].Arrays[0]
	buf := make([]float32, 9000*6)
	if err := a.Samples.ReadFloat32(0, buf); !errors.Is(err, ErrChecksum) {
		t.Fatalf("want a checksum error, got %v", err)
	}
	var faults []h5.ChunkFault
	if _, err := h5.VerifyChunks(path, func(c h5.ChunkFault) { faults = append(faults, c) }); err != nil {
		t.Fatal(err)
	}
	if len(faults) != 1 || faults[0].Dataset != "/trials/ramp_30/arrays/ta_grid/samples" ||
		faults[0].Offset[0] != victim.Offset[0] || faults[0].Offset[1] != victim.Offset[1] {
		t.Fatalf("faults %+v, victim %+v", faults, victim)
	}
	if h5dump, err := exec.LookPath("h5dump"); err == nil {
		out, err := exec.Command(h5dump, "-d", "/trials/ramp_30/arrays/ta_grid/samples", path).CombinedOutput()
		if err == nil && !strings.Contains(string(out), "rror") {
			t.Fatalf("h5dump read the damaged samples without complaint")
		}
	}
}
