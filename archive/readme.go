package archive

import (
	"fmt"
	"sort"
	"strings"
	"time"

	"muarc/schema"
)

// readmeText writes the deposit's data/README.md: what the deposit holds,
// how to read it, how to cite it, its licence and the cautions about data on
// people.
func readmeText(st studyInfo, licence string, sums []RecordingSummary, allowIdentified bool, identified []string, date time.Time) []byte {
	var b strings.Builder
	title := st.Title
	if title == "" {
		title = "Motor-unit study"
		if st.ID != "" {
			title += " " + st.ID
		}
	}
	subjects := map[string]bool{}
	muscles := map[string]bool{}
	var arrays, units int
	for _, s := range sums {
		subjects[s.Subject.ID] = true
		for _, r := range s.Rows {
			arrays++
			units += r.Units
			if r.Muscle != "" {
				muscles[r.Muscle] = true
			}
		}
	}
	fmt.Fprintf(&b, "# %s\n\n", title)
	if st.Description != "" {
		fmt.Fprintf(&b, "%s\n\n", st.Description)
	}
	fmt.Fprintf(&b, "This deposit holds %s of %s: %s with %s",
		plural(len(sums), "recording"), plural(len(subjects), "subject"), plural(arrays, "electrode-array recording"), plural(units, "motor unit"))
	if len(muscles) > 0 {
		ms := sortedKeys(muscles)
		fmt.Fprintf(&b, " (muscles: %s)", strings.Join(ms, ", "))
	}
	b.WriteString(".\n\n")

	b.WriteString("## Contents\n\n")
	fmt.Fprintf(&b, "- `%s/` - one HDF5 file per recording session in the muarc layout %s: force traces, raw EMG of each electrode array with its geometry, motor-unit discharge times (sample indices) and per-unit quality figures, and provenance.\n", RecordingsDir, schema.LayoutVersion)
	fmt.Fprintf(&b, "- `%s/%s` - one row per subject; `%s/%s` - one row per recording.\n", TablesDir, SubjectsTable, TablesDir, RecordingsTable)
	fmt.Fprintf(&b, "- `%s` (and `%s`) - every metadata field: meaning, type, unit.\n", DictionaryMD, DictionaryTSV)
	fmt.Fprintf(&b, "- `%s` - the layout specification: every group, dataset and attribute; `%s` - the licence.\n\n", LayoutFile, LicenceFile)
	b.WriteString("The folder around `data/` is a BagIt 1.0 bag (RFC 8493): `manifest-sha256.txt` lists the SHA-256 of every file here, so the deposit can be checked after any copy, e.g. `muarc verify DEPOSIT`, or `sha256sum -c manifest-sha256.txt` run in the bag's top folder.\n\n")

	b.WriteString("## Reading the files\n\n")
	b.WriteString("Any HDF5 reader works. With Python and h5py:\n\n```python\nimport h5py\nwith h5py.File(\"recordings/FILE.h5\", \"r\") as f:\n")
	b.WriteString("    for trial in f[\"trials\"].values():\n        for array in trial[\"arrays\"].values():\n")
	b.WriteString("            emg = array[\"samples\"]          # [sample, channel]\n")
	b.WriteString("            rate = array.attrs[\"sampling_rate_hz\"]\n")
	b.WriteString("            for dec in array[\"decompositions\"].values():\n")
	b.WriteString("                off = dec[\"discharge_offsets\"][:]\n                d = dec[\"discharges\"][:]\n")
	b.WriteString("                # unit k discharges at samples d[off[k]:off[k+1]], seconds = samples / rate\n```\n\n")

	b.WriteString("## Citation\n\nPlease cite this data set as:\n\n```\n")
	who := st.Contact
	if who == "" {
		who = "The study team"
	}
	fmt.Fprintf(&b, "%s (%d). %s [Data set].", who, date.Year(), title)
	if st.ID != "" {
		fmt.Fprintf(&b, " Study %s.", st.ID)
	}
	fmt.Fprintf(&b, " Packed with %s on %s.\n```\n\n", schema.Software, date.Format("2006-01-02"))
	b.WriteString("Replace the contact by the authors and add the repository's persistent identifier once the deposit has one.\n\n")

	b.WriteString("## Licence\n\n")
	fmt.Fprintf(&b, "The data are shared under %s (SPDX identifier; full text at https://spdx.org/licenses/%s.html).\n\n", licence, strings.Fields(licence)[0])

	b.WriteString("## Data about people\n\n")
	if allowIdentified {
		if len(identified) > 0 {
			ids := append([]string(nil), identified...)
			sort.Strings(ids)
			fmt.Fprintf(&b, "**This deposit carries identifying data** (packed with --allow-identified): %s. It is not for public sharing.\n\n", strings.Join(ids, ", "))
		} else {
			b.WriteString("**This deposit was packed with --allow-identified**: it was not refused for identifying fields. Treat it as not for public sharing.\n\n")
		}
	} else {
		b.WriteString("Every recording passed muarc's checks for identifying fields before packing: subject identifiers are pseudonyms and the fields the layout marks as identifying are empty.\n\n")
	}
	b.WriteString("muarc helps de-identify; it does not certify. Whether these data may be shared, with whom and how, is decided by the ethics board, the consent the participants gave and the local data-protection law, not by this software. Do not try to re-identify participants.\n")
	return []byte(b.String())
}

// licenceText is data/LICENCE.txt: the SPDX expression, the holder as far as
// the study metadata names one, and where the licence texts are.
func licenceText(lic string, st studyInfo) []byte {
	var b strings.Builder
	fmt.Fprintf(&b, "SPDX-License-Identifier: %s\n\n", lic)
	if st.Contact != "" {
		fmt.Fprintf(&b, "Data of the study %q, contact: %s.\n", firstNonEmpty(st.Title, st.ID), st.Contact)
	}
	for _, id := range strings.Fields(lic) {
		if id == "AND" || id == "OR" || id == "WITH" {
			continue
		}
		fmt.Fprintf(&b, "Licence text of %s: https://spdx.org/licenses/%s.html\n", id, id)
	}
	return []byte(b.String())
}

func plural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}
