package deid

import (
	"crypto/hmac"
	"crypto/rand"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"strings"

	"muarc/internal/atomicfile"
)

// KeyBytes is the length of a study key in bytes: 256 bits, the output
// length L of SHA-256 (RFC 2104 section 3 discourages HMAC keys shorter than
// L bytes).
const KeyBytes = 32

// Key is a study's secret key. It is never written into any output; files
// carry only its Fingerprint.
type Key struct{ b []byte }

// NewKeyFile creates path holding KeyBytes random bytes as 64 lower-case hex
// digits and a newline, mode 0600. It refuses to overwrite anything: the
// file is created beside path and hard-linked into place, which fails when
// path exists.
func NewKeyFile(path string) (*Key, error) {
	b := make([]byte, KeyBytes)
	if _, err := rand.Read(b); err != nil {
		return nil, err
	}
	text := hex.EncodeToString(b) + "\n"
	if err := writeNew0600(path, []byte(text)); err != nil {
		return nil, err
	}
	return &Key{b}, nil
}

// writeNew0600 writes data to a new file at path, mode 0600, never replacing
// an existing file and never leaving a partial one.
func writeNew0600(path string, data []byte) error {
	return atomicfile.WriteNew(path, data, 0o600)
}

// LoadKey reads a key file: 64 hex digits (as NewKeyFile writes, surrounding
// white space ignored) or exactly KeyBytes raw bytes. It refuses shorter keys
// and key files that others than the owner may read.
func LoadKey(path string) (*Key, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if fi.IsDir() {
		return nil, fmt.Errorf("%s: a folder, not a key file (make one with `muarc key new FILE`)", path)
	}
	if fi.Mode().Perm()&0o077 != 0 {
		return nil, fmt.Errorf("%s: mode %04o lets others read the study key; run `chmod 600 %s`", path, fi.Mode().Perm(), path)
	}
	if fi.Size() > 1024 {
		return nil, fmt.Errorf("%s: %d bytes is not a key file (want 64 hex digits)", path, fi.Size())
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseKey(b, path)
}

// ParseKey reads a key's bytes as LoadKey does; name is for messages.
func ParseKey(b []byte, name string) (*Key, error) {
	if len(b) == KeyBytes && !isHexText(b) {
		return &Key{append([]byte(nil), b...)}, nil
	}
	s := strings.TrimSpace(string(b))
	k, err := hex.DecodeString(s)
	if err != nil {
		return nil, fmt.Errorf("%s: not a key: want %d hex digits (make one with `muarc key new FILE`)", name, 2*KeyBytes)
	}
	if len(k) < KeyBytes {
		return nil, fmt.Errorf("%s: key of %d bytes is too short; want %d", name, len(k), KeyBytes)
	}
	return &Key{k}, nil
}

func isHexText(b []byte) bool {
	for _, c := range b {
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f' || c >= 'A' && c <= 'F' || c == '\n' || c == '\r' || c == ' ') {
			return false
		}
	}
	return true
}

// KeyFromBytes makes a key from raw bytes (tests, embedding programs). It
// refuses keys shorter than KeyBytes.
func KeyFromBytes(b []byte) (*Key, error) {
	if len(b) < KeyBytes {
		return nil, fmt.Errorf("deid: key of %d bytes is too short; want %d", len(b), KeyBytes)
	}
	return &Key{append([]byte(nil), b...)}, nil
}

// fingerprintLabel is the fixed message whose HMAC is the key's fingerprint.
const fingerprintLabel = "muarc key fingerprint v1"

// Fingerprint identifies the key without revealing it: "kf-" and the first
// 8 bytes, hex, of HMAC-SHA-256(key, "muarc key fingerprint v1"). Files made
// with the same key carry the same fingerprint.
func (k *Key) Fingerprint() string {
	return "kf-" + hex.EncodeToString(k.mac([]byte(fingerprintLabel))[:8])
}

// mac is HMAC-SHA-256 (RFC 2104, FIPS 198-1) of msg under the key.
func (k *Key) mac(msg []byte) []byte {
	return hmacSHA256(k.b, msg)
}

func hmacSHA256(key, msg []byte) []byte {
	m := hmac.New(sha256.New, key)
	m.Write(msg)
	return m.Sum(nil)
}
