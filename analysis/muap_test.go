package analysis

import (
	"math"
	"strings"
	"testing"

	"muarc/record"
)

// naiveAverage averages rows [d+firstLag, d+firstLag+lags) of an in-memory
// matrix directly, the definition of a spike-triggered average.
func naiveAverage(m *record.MemSamples, train []int64, firstLag, lags int) ([]float64, int) {
	out := make([]float64, lags*m.Channels)
	n := 0
	for _, d := range train {
		s := int(d) + firstLag
		if s < 0 || s+lags > m.Samples {
			continue
		}
		for l := 0; l < lags; l++ {
			for c := 0; c < m.Channels; c++ {
				out[l*m.Channels+c] += float64(m.F32[(s+l)*m.Channels+c])
			}
		}
		n++
	}
	for i := range out {
		out[i] /= float64(n)
	}
	return out, n
}

func TestAverageTrainsMatchesDefinitionAcrossBlocks(t *testing.T) {
	const rows, ch = 5000, 3
	m := &record.MemSamples{Samples: rows, Channels: ch, F32: make([]float32, rows*ch)}
	for i := range m.F32 {
		m.F32[i] = float32(math.Sin(float64(i) * 0.37))
	}
	long := make([]int64, 150) // more than flushEvery windows
	for i := range long {
		long[i] = int64(10 + 31*i)
	}
	trains := [][]int64{{2, 40, 41, 900, 2048, 2049, 4990}, {100, 1000, 1001, 3000}, {}, long}
	firstLag, lags := -5, 11
	// Block sizes from the smallest allowed to larger than the matrix, so
	// windows straddle block boundaries.
	for _, block := range []int{1, 11, 64, 1000, 10000} {
		sums, counts, edge, err := averageTrains(m, trains, firstLag, lags, block)
		if err != nil {
			t.Fatal(err)
		}
		for u, tr := range trains {
			want, n := naiveAverage(m, tr, firstLag, lags)
			if counts[u] != n || counts[u]+edge[u] != len(tr) {
				t.Fatalf("block %d unit %d: %d averaged %d at edge, want %d of %d", block, u, counts[u], edge[u], n, len(tr))
			}
			for i := range want {
				// Windows are added in float32 (flushed to float64 every
				// flushEvery windows): agreement to about 1e-6.
				if n > 0 && math.Abs(sums[u][i]/float64(n)-want[i]) > 1e-6*(1+math.Abs(want[i])) {
					t.Fatalf("block %d unit %d value %d: %v want %v", block, u, i, sums[u][i]/float64(n), want[i])
				}
			}
		}
	}
}

// seqOnly refuses any read that does not continue where the last ended, as
// a streaming source may.
type seqOnly struct {
	*record.MemSamples
	next int
}

func (s *seqOnly) ReadFloat32(start int, dst []float32) error {
	if start != s.next {
		return errTest
	}
	s.next = start + len(dst)/s.Channels
	return s.MemSamples.ReadFloat32(start, dst)
}

type testErr string

func (e testErr) Error() string { return string(e) }

const errTest = testErr("non-sequential read")

func TestArrayTemplatesRecoversShape(t *testing.T) {
	// Two channels; every discharge adds a triangle of height 10 (channel 0)
	// and -4 (channel 1) peaking at the discharge sample; the background
	// alternates ±1 so that it averages out only approximately.
	const fs, rows = 2000.0, 20000
	m := &record.MemSamples{Samples: rows, Channels: 2, F32: make([]float32, rows*2)}
	for i := 0; i < rows; i++ {
		s := float32(1)
		if i%2 == 1 {
			s = -1
		}
		m.F32[2*i], m.F32[2*i+1] = s, -s
	}
	var d []int64
	for k := int64(20); k < rows; k += 201 { // odd spacing: the background alternates sign
		d = append(d, k)
		for l := -4; l <= 4; l++ {
			if k+int64(l) < 0 || k+int64(l) >= rows {
				continue
			}
			h := float32(4-abs(l)) / 4
			m.F32[2*(int(k)+l)] += 10 * h
			m.F32[2*(int(k)+l)+1] += -4 * h
		}
	}
	arr := record.Array{Name: "g", SamplingRateHz: fs, Unit: "uV", Samples: &seqOnly{MemSamples: m},
		Rows: 1, Columns: 2, Channels: []record.Channel{{Row: 0, Column: 0}, {Row: 0, Column: 1}}}
	u := record.NewUnit(1)
	u.Discharges = d
	arr.Decompositions = []record.Decomposition{{Name: "a", Units: []record.Unit{u}}}
	ts, err := ArrayTemplates(&arr, MUAPHalfWindowS)
	if err != nil {
		t.Fatal(err)
	}
	tp := ts[0]
	// ±25 ms at 2000 Hz: 50 samples each side, 101 lags.
	if tp.MUAPs.FirstLag != -50 || tp.MUAPs.Lags != 101 || tp.MUAPs.Unit != "uV" {
		t.Fatalf("window %+v", tp.MUAPs)
	}
	// The first discharge (sample 20) has no 50 samples before it.
	if tp.AtEdge[0] != 1 || tp.Averaged[0] != len(d)-1 {
		t.Fatalf("averaged %d, at edge %d of %d", tp.Averaged[0], tp.AtEdge[0], len(d))
	}
	peak := tp.MUAPs.At(0, 0, 50)
	// Peak 10 plus a background that cancels to within 1/n.
	if math.Abs(float64(peak)-10) > 0.02 {
		t.Errorf("peak %v, want 10", peak)
	}
	// Peak-to-peak of channel 1: the triangle of -4 over the background of
	// ±1 (+1 at even lags of even discharges, which cancel): about 4.
	if p := tp.PeakToPeak[0][1]; math.Abs(p-4) > 0.1 {
		t.Errorf("peak-to-peak ch1 %v, want 4", p)
	}
	g := GridMap(&arr, tp.PeakToPeak[0])
	if len(g) != 1 || len(g[0]) != 2 || g[0][1] != tp.PeakToPeak[0][1] {
		t.Errorf("grid map %v", g)
	}
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// failAt fails any read that reaches row bad.
type failAt struct {
	*record.MemSamples
	bad int
}

func (f *failAt) ReadFloat32(start int, dst []float32) error {
	if start+len(dst)/f.Channels > f.bad {
		return testErr("damaged chunk")
	}
	return f.MemSamples.ReadFloat32(start, dst)
}

func TestAverageTrainsReportsReadErrors(t *testing.T) {
	const rows, ch = 30000, 2
	m := &record.MemSamples{Samples: rows, Channels: ch, F32: make([]float32, rows*ch)}
	src := &failAt{MemSamples: m, bad: 20000}
	var train []int64
	for d := int64(100); d < rows-100; d += 97 {
		train = append(train, d)
	}
	_, _, _, err := averageTrains(src, [][]int64{train, train}, -10, 21, 1000)
	if err == nil || !strings.Contains(err.Error(), "damaged chunk") || !strings.Contains(err.Error(), "rows 20000..21000") {
		t.Errorf("read error: %v", err)
	}
	// Windows wholly before the damage are fine when no discharge needs it.
	if _, counts, _, err := averageTrains(src, [][]int64{{100, 5000, 15000}}, -10, 21, 1000); err != nil || counts[0] != 3 {
		t.Errorf("undamaged part: %v %v", counts, err)
	}
}
