package archive

import (
	"encoding/hex"
	"encoding/json"
	"hash"
	"io"

	"muarc/archive/bagit"
)

func hexSum(h hash.Hash) string { return hex.EncodeToString(h.Sum(nil)) }

// writeJSON writes v as indented JSON with a final newline.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}

// sumOf is the hex digest of data under a manifest algorithm.
func sumOf(alg string, data []byte) string {
	h := bagit.NewHash(alg)
	h.Write(data)
	return hexSum(h)
}

// multiHash feeds one stream to several manifest algorithms at once.
type multiHash struct {
	algs []string
	hs   []hash.Hash
	w    io.Writer
}

func newMultiHash(algs []string) *multiHash {
	m := &multiHash{algs: algs}
	var ws []io.Writer
	for _, a := range algs {
		h := bagit.NewHash(a)
		m.hs = append(m.hs, h)
		ws = append(ws, h)
	}
	m.w = io.MultiWriter(ws...)
	if len(ws) == 1 {
		m.w = ws[0]
	}
	return m
}

func (m *multiHash) Write(b []byte) (int, error) { return m.w.Write(b) }

// set stores the digests in fr.
func (m *multiHash) set(fr *FileRecord) {
	for i, a := range m.algs {
		switch a {
		case "sha256":
			fr.SHA256 = hexSum(m.hs[i])
		case "sha512":
			fr.SHA512 = hexSum(m.hs[i])
		}
	}
}

// sum returns fr's digest under alg.
func (fr FileRecord) sum(alg string) string {
	if alg == "sha512" {
		return fr.SHA512
	}
	return fr.SHA256
}
