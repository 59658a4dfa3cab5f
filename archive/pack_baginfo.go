// bag-info.txt and the tag files.

package archive

import (
	"fmt"
	"strings"

	"muarc/archive/bagit"
	"muarc/schema"
)

// info builds bag-info.txt.
func (p *packer) info(octets, files int64) []byte {
	var f []bagit.Field
	if p.study.ID != "" {
		f = append(f, bagit.Field{Label: "External-Identifier", Value: p.study.ID})
	}
	desc := p.study.Title
	if p.study.Description != "" {
		if desc != "" {
			desc += ". "
		}
		desc += p.study.Description
	}
	if desc != "" {
		f = append(f, bagit.Field{Label: "External-Description", Value: desc})
	}
	f = append(f, contactFields(p.study.Contact)...)
	f = append(f,
		bagit.Field{Label: "Bagging-Date", Value: p.bagDate().Format("2006-01-02")},
		bagit.Field{Label: "Bag-Software-Agent", Value: schema.Software},
		bagit.Field{Label: "Payload-Oxum", Value: bagit.PayloadOxum(octets, files)},
		bagit.Field{Label: "Bag-Size", Value: humanBytes(octets)},
		bagit.Field{Label: "Licence-SPDX", Value: p.res.Licence},
	)
	f = append(f, acceptedDamageFields(p.res.Files)...)
	if p.opt.AllowIdentified {
		v := "not checked: packed with --allow-identified; no recording was found to carry identifying fields, but the bag is not for public deposit"
		if len(p.identified) > 0 {
			v = fmt.Sprintf("PRESENT: packed with --allow-identified; %d recordings still carry %s. Not for public deposit",
				len(p.identified), strings.Join(sortedKeys(p.identFields), ", "))
		}
		f = append(f, bagit.Field{Label: identifyingLabel, Value: v})
	}
	return bagit.FormatInfo(f)
}

func humanBytes(n int64) string {
	units := []string{"bytes", "KB", "MB", "GB", "TB"}
	v := float64(n)
	i := 0
	for v >= 1000 && i < len(units)-1 {
		v /= 1000
		i++
	}
	if i == 0 {
		return fmt.Sprintf("%d bytes", n)
	}
	return fmt.Sprintf("%.1f %s", v, units[i])
}

// tagFiles makes the tag files: bagit.txt, bag-info.txt, one payload
// manifest per algorithm, then one tag manifest per algorithm listing all of
// those (RFC 8493 section 2.2.1).
func (p *packer) tagFiles(entries map[string][]bagit.Entry, info []byte) []doc {
	tags := []doc{{bagit.DeclarationFile, []byte(bagit.Declaration)}, {bagit.InfoFile, info}}
	for _, alg := range p.algs() {
		tags = append(tags, doc{bagit.ManifestName(alg), bagit.FormatManifest(entries[alg])})
	}
	out := tags
	for _, alg := range p.algs() {
		var es []bagit.Entry
		for _, t := range tags {
			es = append(es, bagit.Entry{Path: t.path, Sum: sumOf(alg, t.data)})
		}
		out = append(out, doc{bagit.TagManifestName(alg), bagit.FormatManifest(es)})
	}
	return out
}
