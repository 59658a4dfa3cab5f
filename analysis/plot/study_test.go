package plot

import (
	"fmt"
	"reflect"
	"testing"

	"muarc/analysis/study"
)

// A muscle with more subjects than StudySubjectsPerFigure gets its figure
// in parts of that many subjects, in the order of their codes, each named
// and captioned with its subjects; a muscle with fewer keeps one figure
// under the plain name.
func TestStudyFiguresInParts(t *testing.T) {
	res := &study.Result{Sources: []study.Source{{File: "x.h5"}}}
	add := func(muscle string, subjects int) {
		for s := subjects - 1; s >= 0; s-- { // rows out of code order
			for _, rel := range study.Relations {
				res.Rows = append(res.Rows, study.SubjectRow{Subject: fmt.Sprintf("S%02d", s), Muscle: muscle, LevelPct: 30, Relation: rel,
					Points: [][2]float64{{5, 10}, {10, 12}, {15, 13 + float64(s)}}, Fit: study.FitLine([]float64{5, 10, 15}, []float64{10, 12, 13 + float64(s)})})
			}
		}
	}
	per := StudySubjectsPerFigure
	add("vastus lateralis", 2*per+3)
	add("soleus", per)
	figs := StudyFigures(res)
	if len(figs) != 4 {
		t.Fatalf("%d figures, want 3 parts and 1", len(figs))
	}
	for k, want := range [][2]int{{0, per}, {per, 2 * per}, {2 * per, 2*per + 3}} {
		f := figs[k]
		var subj []string
		for s := want[0]; s < want[1]; s++ {
			subj = append(subj, fmt.Sprintf("S%02d", s))
		}
		name := fmt.Sprintf("study__vastus_lateralis__rate_threshold__part%02d_of_03", k+1)
		caption := fmt.Sprintf("vastus lateralis (subjects %s to %s, part %d of 3): ", subj[0], subj[len(subj)-1], k+1)
		if f.Name != name || f.Muscle != "vastus lateralis" || !reflect.DeepEqual(f.Subjects, subj) || len(f.Caption) < len(caption) || f.Caption[:len(caption)] != caption {
			t.Errorf("part %d: name %q muscle %q subjects %v caption %q", k+1, f.Name, f.Muscle, f.Subjects, f.Caption)
		}
	}
	if f := figs[3]; f.Name != "study__soleus__rate_threshold" || len(f.Subjects) != per {
		t.Errorf("soleus: %q %v", f.Name, f.Subjects)
	}
	// The columns are 3.2 inches each: a part is as wide as its subjects.
	if w0, w2 := figs[0].Figure.Width, figs[2].Figure.Width; w0 <= w2 {
		t.Errorf("part widths %v and %v: the part of 3 subjects should be narrower", w0, w2)
	}
}
