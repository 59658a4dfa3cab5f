package record

import "testing"

func TestMemSamplesBlocks(t *testing.T) {
	m := &MemSamples{Samples: 3, Channels: 2, F32: []float32{1, 2, 3, 4, 5, 6}}
	dst := make([]float64, 4)
	if err := m.ReadFloat64(1, dst); err != nil || dst[0] != 3 || dst[3] != 6 {
		t.Fatalf("%v %v", dst, err)
	}
	if err := m.ReadFloat32(2, make([]float32, 4)); err == nil {
		t.Fatal("read past the end accepted")
	}
	if err := m.ReadFloat32(0, make([]float32, 3)); err == nil {
		t.Fatal("partial row accepted")
	}
	if u := NewUnit(4); u.ID != 4 || u.Silhouette == u.Silhouette {
		t.Fatal("NewUnit figures must be NaN")
	}
}
