// The generated payload documents of a deposit: tables, dictionary, layout, README.

package archive

import (
	"bytes"
	"path"
	"regexp"
	"time"

	"muarc/archive/bagit"
	"muarc/schema"
)

// doc is one generated payload file: bag-relative path and content.
type doc struct {
	path string
	data []byte
}

// documents makes the generated payload files: tables, dictionary, layout,
// README.
func (p *packer) documents(sums []RecordingSummary, files []FileRecord) ([]doc, error) {
	sha := map[string]string{}
	for _, f := range files {
		sha[f.Path] = f.SHA256
	}
	tables := StudyTables(sums, sha)
	p.res.Notes = append(p.res.Notes, tables.Notes...)
	dict, err := DataDictionary()
	if err != nil {
		return nil, err
	}
	var md, tsv bytes.Buffer
	WriteDictionaryMarkdown(&md, dict)
	WriteDictionaryTSV(&tsv, dict)

	study, notes := studyOf(sums)
	p.res.Notes = append(p.res.Notes, notes...)
	lic := p.res.Licence
	p.study = study
	for _, f := range files {
		if len(f.Identifying) > 0 {
			p.identified = append(p.identified, f.Path)
			for _, n := range f.Identifying {
				// "trials[2].notes" -> "trials[].notes": one name per field.
				p.identFields[listIndex.ReplaceAllString(n, "[]")] = true
			}
		}
	}
	p.res.Identified = p.opt.AllowIdentified
	readme := readmeText(study, lic, sums, p.opt.AllowIdentified, p.identified, p.bagDate())
	d := func(parts ...string) string { return path.Join(append([]string{bagit.PayloadDir}, parts...)...) }
	return []doc{
		{d(ReadmeFile), readme},
		{d(LicenceFile), licenceText(lic, study)},
		{d(LayoutFile), []byte(schema.Layout)},
		{d(DictionaryMD), md.Bytes()},
		{d(DictionaryTSV), tsv.Bytes()},
		{d(TablesDir, SubjectsTable), tables.Subjects},
		{d(TablesDir, RecordingsTable), tables.Recordings},
	}, nil
}

func (p *packer) bagDate() time.Time {
	if p.opt.Date.IsZero() {
		return time.Now().UTC()
	}
	return p.opt.Date.UTC()
}

var listIndex = regexp.MustCompile(`\[[0-9]+\]`)
