package bids

import (
	"os"
	"path/filepath"
	"strconv"

	"muarc/internal/atomicfile"
	"muarc/record"
)

func writeText(path, s string, overwrite bool) error {
	return atomicfile.WriteFile(path, []byte(s), overwrite)
}

// derivatives writes each decomposition of the trial as
// derivatives/muarc/<rel>/<prefix>_task-<task>_desc-<array><decomposition>_motorunits.tsv
// and _discharges.tsv, with JSON sidecars describing every column.
func (w *writer) derivatives(t *record.Trial, prefix, task, rel string) error {
	dir := filepath.Join(w.dir, "derivatives", "muarc", rel)
	for _, a := range t.Arrays {
		for _, d := range a.Decompositions {
			if err := os.MkdirAll(dir, 0o755); err != nil {
				return err
			}
			base := filepath.Join(dir, prefix+"_task-"+task+"_desc-"+Label(a.Name)+Label(d.Name))
			head := []string{"unit_id", "discharges", "silhouette", "pnr_db", "accuracy_pct", "isi_cov", "recruit_pct_mvc", "derecruit_pct_mvc", "initial_rate_pps", "mean_rate_pps"}
			for _, c := range d.ExtraColumns {
				head = append(head, c.Name)
			}
			var rows, dis [][]string
			for ui, u := range d.Units {
				row := []string{strconv.FormatInt(u.ID, 10), strconv.Itoa(len(u.Discharges)), num(u.Silhouette), num(u.PNRdB), num(u.AccuracyPct), num(u.ISICoV),
					num(u.RecruitPctMVC), num(u.DerecruitPctMVC), num(u.InitialRatePPS), num(u.MeanRatePPS)}
				for _, c := range d.ExtraColumns {
					if c.Values != nil {
						row = append(row, num(c.Values[ui]))
					} else {
						row = append(row, c.Text[ui])
					}
				}
				rows = append(rows, row)
				for _, k := range u.Discharges {
					dis = append(dis, []string{strconv.FormatInt(u.ID, 10), strconv.FormatInt(k, 10), num(float64(k) / a.SamplingRateHz)})
				}
			}
			if err := w.tsv(base+"_motorunits.tsv", head, rows); err != nil {
				return err
			}
			cols := map[string]any{
				"unit_id":           map[string]any{"Description": "motor unit identifier within the decomposition"},
				"discharges":        map[string]any{"Description": "number of discharges of the unit"},
				"silhouette":        map[string]any{"Description": "silhouette measure of the unit's source (0 to 1)"},
				"pnr_db":            map[string]any{"Description": "pulse-to-noise ratio", "Units": "dB"},
				"accuracy_pct":      map[string]any{"Description": "decomposition accuracy reported by the method", "Units": "%"},
				"isi_cov":           map[string]any{"Description": "coefficient of variation of the inter-discharge intervals"},
				"recruit_pct_mvc":   map[string]any{"Description": "force at the first discharge", "Units": "% MVC"},
				"derecruit_pct_mvc": map[string]any{"Description": "force at the last discharge", "Units": "% MVC"},
				"initial_rate_pps":  map[string]any{"Description": "initial discharge rate", "Units": "pulses per second"},
				"mean_rate_pps":     map[string]any{"Description": "mean discharge rate", "Units": "pulses per second"},
				"Array":             a.Name,
				"Decomposition":     d.Name,
				"Method":            d.Method,
				"MethodVersion":     d.MethodVersion,
				"EditedByHand":      d.EditedByHand,
			}
			for _, c := range d.ExtraColumns {
				m := map[string]any{"Description": "per-unit column " + c.Name + " as given by the lab"}
				if c.Unit != "" {
					m["Units"] = c.Unit
				}
				cols[c.Name] = m
			}
			if err := w.json(base+"_motorunits.json", cols); err != nil {
				return err
			}
			if err := w.tsv(base+"_discharges.tsv", []string{"unit_id", "sample", "onset"}, dis); err != nil {
				return err
			}
			if err := w.json(base+"_discharges.json", map[string]any{
				"unit_id":           map[string]any{"Description": "motor unit identifier, as in the _motorunits.tsv file"},
				"sample":            map[string]any{"Description": "0-based index of the discharge in the EMG samples of the array (the _emg.bdf file's samples)"},
				"onset":             map[string]any{"Description": "discharge time from the first sample of the data file", "Units": "s"},
				"SamplingFrequency": a.SamplingRateHz,
				"Array":             a.Name,
				"Decomposition":     d.Name,
			}); err != nil {
				return err
			}
		}
	}
	return nil
}
