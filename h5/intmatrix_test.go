package h5

import (
	"path/filepath"
	"testing"
)

// TestIntegerMatrix writes int8, int16 and int32 matrices with direct chunk
// writes and reads them back through the fast path and through the HDF5
// library's own filter pipeline (ReadSlab64), which checks the Fletcher-32
// checksums and undoes shuffle and deflate itself: the library is the
// reference here.
func TestIntegerMatrix(t *testing.T) {
	const rows, cols = 1000, 7
	for _, typ := range []string{"int8", "int16", "int32"} {
		name := filepath.Join(t.TempDir(), typ+".h5")
		f, err := Create(name)
		if err != nil {
			t.Fatal(err)
		}
		root, _ := f.Root()
		w, err := root.CreateMatrixOf("m", typ, cols, 256, 3, 1)
		if err != nil {
			t.Fatal(err)
		}
		want := make([]int32, rows*cols)
		for i := range want {
			v := int32(i*7919%251) - 125
			switch typ {
			case "int16":
				v *= 257
			case "int32":
				v *= 16777259
			}
			want[i] = v
		}
		for r := 0; r < rows; r += 256 {
			part := want[r*cols : min(r+256, rows)*cols]
			switch typ {
			case "int8":
				b := make([]int8, len(part))
				for i, v := range part {
					b[i] = int8(v)
				}
				err = w.WriteBandInt8(b)
			case "int16":
				b := make([]int16, len(part))
				for i, v := range part {
					b[i] = int16(v)
				}
				err = w.WriteBandInt16(b)
			default:
				err = w.WriteBandInt32(part)
			}
			if err != nil {
				t.Fatal(err)
			}
		}
		if err := w.WriteBand32(make([]float32, cols)); err == nil {
			t.Fatalf("%s: a float32 band was taken", typ)
		}
		w.Close()
		root.Close()
		if err := f.Close(); err != nil {
			t.Fatal(err)
		}
		f, err = Open(name)
		if err != nil {
			t.Fatal(err)
		}
		root, _ = f.Root()
		d, err := root.OpenDataset("m", 1<<20)
		if err != nil {
			t.Fatal(err)
		}
		if d.Type != typ {
			t.Fatalf("stored as %s, want %s", d.Type, typ)
		}
		lib := make([]float64, rows*cols)
		if err := d.ReadSlab64([]int{0, 0}, []int{rows, cols}, lib); err != nil {
			t.Fatal(err)
		}
		got := make([]int32, 5*3)
		if err := d.ReadRectInt32(300, 5, 2, 3, got); err != nil {
			t.Fatal(err)
		}
		f64 := make([]float64, 5*3)
		if err := d.ReadRect64(300, 5, 2, 3, f64); err != nil {
			t.Fatal(err)
		}
		for r := 0; r < 5; r++ {
			for c := 0; c < 3; c++ {
				i := (300+r)*cols + 2 + c
				if lib[i] != float64(want[i]) || got[r*3+c] != want[i] || f64[r*3+c] != float64(want[i]) {
					t.Fatalf("%s [%d,%d]: library %v, fast %v / %v, want %v", typ, 300+r, 2+c, lib[i], got[r*3+c], f64[r*3+c], want[i])
				}
			}
		}
		for i, v := range lib {
			if v != float64(want[i]) {
				t.Fatalf("%s element %d: library reads %v, want %v", typ, i, v, want[i])
			}
		}
		d.Close()
		root.Close()
		f.Close()
	}
}
