package deid

import (
	"encoding/base32"
	"encoding/binary"
	"fmt"
	"path"
	"sort"
	"strings"
	"sync"
)

// Pseudonym prefixes, one per kind of identifier, so a reader can tell a
// participant code from a visit code or a file name.
const (
	SubjectPrefix = "P-" // participant
	SessionPrefix = "V-" // visit (session)
	SourcePrefix  = "F-" // source file
	NamePrefix    = "N-" // a pseudonymized group name (trial, array, ...)
	ExtraPrefix   = "X-" // a pseudonymized extra field value
)

// PseudonymBytes is how many leading bytes of the HMAC the short form shows:
// 5 bytes = 40 bits = 8 base32 characters. For n distinct ids the chance
// that any two share a pseudonym is about n*n/2^41 (the birthday bound):
// 4.5e-5 for 10 000 subjects, 4.5e-7 for 1 000. Collisions are detected
// (Registry) rather than assumed away.
const PseudonymBytes = 5

// b32 is RFC 4648 base32 without padding; its alphabet (A-Z, 2-7) has no 0,
// 1, 8 or 9 to confuse with O, I, B or g.
var b32 = base32.StdEncoding.WithPadding(base32.NoPadding)

// Pseudonymizer derives pseudonyms and date shifts from a study key.
type Pseudonymizer struct {
	key *Key
}

// NewPseudonymizer returns a pseudonymizer for key.
func NewPseudonymizer(key *Key) *Pseudonymizer { return &Pseudonymizer{key} }

// Fingerprint is the key's fingerprint.
func (p *Pseudonymizer) Fingerprint() string { return p.key.Fingerprint() }

// digest is HMAC-SHA-256(key, domain || 0x00 || parts joined by 0x00). The
// domain keeps a subject id and a session id that happen to be equal apart.
func (p *Pseudonymizer) digest(domain string, parts ...string) []byte {
	msg := []byte(domain)
	for _, s := range parts {
		msg = append(msg, 0)
		msg = append(msg, s...)
	}
	return p.key.mac(msg)
}

func short(prefix string, d []byte) string { return prefix + b32.EncodeToString(d[:PseudonymBytes]) }

// Subject returns the participant pseudonym of an original subject id, e.g.
// "P-K5QW2MZA". Surrounding white space in id is ignored.
func (p *Pseudonymizer) Subject(id string) string {
	return short(SubjectPrefix, p.digest("subject", strings.TrimSpace(id)))
}

// Session returns the pseudonym of a session id; it depends on the subject
// too, so equal session codes of different subjects ("V1") differ.
func (p *Pseudonymizer) Session(subjectID, sessionID string) string {
	return short(SessionPrefix, p.digest("session", strings.TrimSpace(subjectID), strings.TrimSpace(sessionID)))
}

// Source returns the pseudonymous name of a source file: prefix, the base32
// form of HMAC(subject id, name), and the original extension when it is a
// plain 1-5 character one ("F-2C3T6JQM.csv").
func (p *Pseudonymizer) Source(subjectID, name string) string {
	return short(SourcePrefix, p.digest("source", strings.TrimSpace(subjectID), name)) + safeExt(name)
}

// sourceN is Source for the n-th (0-based) listing of the same name.
func (p *Pseudonymizer) sourceN(subjectID, name string, n int) string {
	if n == 0 {
		return p.Source(subjectID, name)
	}
	return short(SourcePrefix, p.digest("source", strings.TrimSpace(subjectID), name, fmt.Sprint(n))) + safeExt(name)
}

// Name returns the pseudonym of a group name (domain "trial", "array",
// "decomposition"); it is a valid group name.
func (p *Pseudonymizer) Name(domain, subjectID, name string) string {
	return short(NamePrefix, p.digest("name:"+domain, strings.TrimSpace(subjectID), name))
}

// Extra returns the pseudonym of an extra field's value.
func (p *Pseudonymizer) Extra(field, subjectID, value string) string {
	return short(ExtraPrefix, p.digest("extra:"+field, strings.TrimSpace(subjectID), value))
}

// ShiftDays returns the subject's date offset in whole days: 1..maxDays
// days earlier or later, from HMAC(key, "date-shift", subject id). It is
// never 0, so a shifted date always differs from the original.
func (p *Pseudonymizer) ShiftDays(subjectID string, maxDays int) int {
	if maxDays < 1 {
		maxDays = 1
	}
	d := p.digest("date-shift", strings.TrimSpace(subjectID))
	v := binary.BigEndian.Uint64(d[:8])
	days := int(v>>1%uint64(maxDays)) + 1
	if v&1 == 1 {
		days = -days
	}
	return days
}

func safeExt(name string) string {
	ext := strings.ToLower(path.Ext(strings.ReplaceAll(name, "\\", "/")))
	if len(ext) < 2 || len(ext) > 6 {
		return ""
	}
	for _, c := range ext[1:] {
		if !(c >= 'a' && c <= 'z' || c >= '0' && c <= '9') {
			return ""
		}
	}
	return ext
}

// IsPseudonym reports whether s has the short form of a pseudonym with the
// given prefix (prefix + 8 base32 characters).
func IsPseudonym(prefix, s string) bool {
	rest, ok := strings.CutPrefix(s, prefix)
	if !ok || len(rest) != 8 {
		return false
	}
	_, err := b32.DecodeString(rest)
	return err == nil
}

// Registry records which original id each pseudonym stands for across a
// study and reports collisions: two different originals with one pseudonym.
// It is safe for concurrent use.
type Registry struct {
	mu  sync.Mutex
	by  map[string]string // pseudonym -> original
	bad map[string][]string
}

// NewRegistry returns an empty registry.
func NewRegistry() *Registry {
	return &Registry{by: map[string]string{}, bad: map[string][]string{}}
}

// Add records that pseudonym stands for original. It returns an error when
// the pseudonym already stands for a different original.
func (r *Registry) Add(pseudonym, original string) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if prev, ok := r.by[pseudonym]; ok && prev != original {
		r.bad[pseudonym] = appendUnique(appendUnique(r.bad[pseudonym], prev), original)
		return fmt.Errorf("pseudonym collision: two different ids map to %s (make a new key for this study, or report it: the chance is about n*n/2^41)", pseudonym)
	}
	r.by[pseudonym] = original
	return nil
}

// Collisions lists the pseudonyms that stand for more than one original.
func (r *Registry) Collisions() []string {
	r.mu.Lock()
	defer r.mu.Unlock()
	var out []string
	for p := range r.bad {
		out = append(out, p)
	}
	sort.Strings(out)
	return out
}

// Pairs returns original -> pseudonym for every entry (for a linkage file).
func (r *Registry) Pairs() map[string]string {
	r.mu.Lock()
	defer r.mu.Unlock()
	out := make(map[string]string, len(r.by))
	for p, o := range r.by {
		out[o] = p
	}
	return out
}

func appendUnique(list []string, s string) []string {
	for _, x := range list {
		if x == s {
			return list
		}
	}
	return append(list, s)
}
