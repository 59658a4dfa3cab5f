package bids

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"

	"muarc/record"
	"muarc/schema"
)

// top writes dataset_description.json, participants.tsv/.json, README and
// the derivatives' dataset_description.json.
func (w *writer) top(study record.Study, ps []participant) error {
	name := study.Title
	if name == "" {
		name = study.ID
	}
	if name == "" {
		name = "muarc study"
	}
	dd := map[string]any{
		"Name":        name,
		"BIDSVersion": Version,
		"DatasetType": "raw",
		"GeneratedBy": []map[string]any{{"Name": "muarc", "Version": schema.SoftwareVersion, "Description": "muarc export --bids"}},
	}
	if study.License != "" {
		dd["License"] = study.License
	} else {
		w.rep.notKnown("License", "dataset_description.json")
	}
	if err := w.json(filepath.Join(w.dir, "dataset_description.json"), dd); err != nil {
		return err
	}
	var rows [][]string
	for _, p := range ps {
		sex := map[string]string{"female": "F", "male": "M", "other": "O"}[p.sex]
		age := ""
		if !math.IsNaN(p.age) {
			age = strconv.FormatFloat(p.age, 'g', -1, 64)
		}
		rows = append(rows, []string{p.id, sex, age, p.band})
	}
	if err := w.tsv(filepath.Join(w.dir, "participants.tsv"), []string{"participant_id", "sex", "age", "age_band"}, rows); err != nil {
		return err
	}
	if err := w.json(filepath.Join(w.dir, "participants.json"), map[string]any{
		"participant_id": map[string]any{"Description": "participant label: the muarc pseudonym with letters and digits only"},
		"sex":            map[string]any{"Description": "sex of the participant as recorded", "Levels": map[string]string{"F": "female", "M": "male", "O": "other"}},
		"age":            map[string]any{"Description": "age at the session (absent after de-identification to a band)", "Units": "year"},
		"age_band":       map[string]any{"Description": "generalised age, e.g. 30-39 or 90 or older"},
	}); err != nil {
		return err
	}
	readme := fmt.Sprintf("%s\n\nHigh-density surface EMG with force during trapezoidal isometric contractions, written by %s from muarc files (layout %s) as a BIDS %s dataset of the EMG datatype.\n\n"+
		"Each sub-*/[ses-*/]emg/*_emg.bdf holds one trial: every grid's channels (labels in *_channels.tsv, grid positions in *_electrodes.tsv) and the force as MISC channels; motor-unit discharges are also annotations of the BDF+ file.\n"+
		"derivatives/muarc/ holds the motor-unit decompositions: *_motorunits.tsv (one row per unit with its quality figures) and *_discharges.tsv (one row per discharge), each with a JSON sidecar describing every column.\n\n"+
		"Data about people: muarc helps de-identify, it does not certify. The ethics board, the participants' consent and local law decide what may be shared.\n",
		name, schema.Software, schema.LayoutVersion, Version)
	if err := writeText(filepath.Join(w.dir, "README"), readme, w.overwrite); err != nil {
		return err
	}
	der := filepath.Join(w.dir, "derivatives", "muarc")
	if err := os.MkdirAll(der, 0o755); err != nil {
		return err
	}
	return w.json(filepath.Join(der, "dataset_description.json"), map[string]any{
		"Name":        name + ": motor-unit decompositions",
		"BIDSVersion": Version,
		"DatasetType": "derivative",
		"GeneratedBy": []map[string]any{{"Name": "muarc", "Version": schema.SoftwareVersion, "Description": "motor-unit discharges and unit tables as stored in the muarc files"}},
	})
}
