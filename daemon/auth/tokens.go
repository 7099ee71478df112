package auth

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"crypto/subtle"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"strings"
)

// MinTokenLength is the shortest token a tokens file may hold; short tokens can be guessed.
const MinTokenLength = 16

// maxTokensFileBytes bounds what LoadTokens reads.
const maxTokensFileBytes = 1 << 20

// Tokens maps bearer tokens to identities. Only SHA-256 digests of the tokens are kept.
type Tokens struct {
	entries []tokenEntry
}

type tokenEntry struct {
	digest [sha256.Size]byte
	id     Identity
}

// Len is the number of tokens.
func (t *Tokens) Len() int { return len(t.entries) }

// LoadTokens reads a tokens file. It refuses a file that other users can read or write (on systems with Unix
// permissions), since the tokens grant control of the X-ray source.
func LoadTokens(path string) (*Tokens, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("tokens file: %w", err)
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("tokens file: %w", err)
	}
	if runtime.GOOS != "windows" && fi.Mode().Perm()&0o006 != 0 {
		return nil, fmt.Errorf("tokens file %s: mode %v lets every user read or write it; run chmod 600 (or 640 for a group) on it",
			path, fi.Mode().Perm())
	}
	b, err := io.ReadAll(io.LimitReader(f, maxTokensFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("tokens file %s: %w", path, err)
	}
	if len(b) > maxTokensFileBytes {
		return nil, fmt.Errorf("tokens file %s: larger than %d bytes", path, maxTokensFileBytes)
	}
	t, err := ParseTokens(bytes.NewReader(b))
	if err != nil {
		return nil, fmt.Errorf("tokens file %s: %w", path, err)
	}
	return t, nil
}

// ParseTokens reads lines of "ROLE NAME TOKEN" separated by blanks; empty lines and lines starting with # are
// skipped. Errors name the line and never contain a token.
func ParseTokens(r io.Reader) (*Tokens, error) {
	t := &Tokens{}
	seen := map[[sha256.Size]byte]int{}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 4096), 64<<10)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		e, err := parseTokenLine(line)
		if err != nil {
			return nil, fmt.Errorf("line %d: %w", n, err)
		}
		if first, dup := seen[e.digest]; dup {
			return nil, fmt.Errorf("line %d: the same token as line %d; give every caller its own token", n, first)
		}
		seen[e.digest] = n
		t.entries = append(t.entries, e)
	}
	if err := sc.Err(); err != nil {
		if errors.Is(err, bufio.ErrTooLong) {
			return nil, errors.New("a line is longer than 64 KiB")
		}
		return nil, err
	}
	if len(t.entries) == 0 {
		return nil, errors.New("no tokens (want lines of ROLE NAME TOKEN)")
	}
	return t, nil
}

func parseTokenLine(line string) (tokenEntry, error) {
	f := strings.Fields(line)
	if len(f) != 3 {
		return tokenEntry{}, fmt.Errorf("want 3 fields ROLE NAME TOKEN, got %d", len(f))
	}
	role, err := ParseRole(f[0])
	if err != nil {
		return tokenEntry{}, err
	}
	if !printable(f[1]) {
		return tokenEntry{}, errors.New("NAME has characters other than printable ASCII")
	}
	if len(f[2]) < MinTokenLength {
		return tokenEntry{}, fmt.Errorf("TOKEN of %s is shorter than %d characters", f[1], MinTokenLength)
	}
	if !printable(f[2]) {
		return tokenEntry{}, fmt.Errorf("TOKEN of %s has characters other than printable ASCII", f[1])
	}
	return tokenEntry{digest: sha256.Sum256([]byte(f[2])), id: Identity{Name: f[1], Role: role, Via: "token"}}, nil
}

func printable(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] <= ' ' || s[i] > '~' {
			return false
		}
	}
	return true
}

// Lookup finds the identity of a presented token. It compares digests of equal length and visits every entry
// whatever matches, so the time taken says nothing about which token, or how much of one, was right.
func (t *Tokens) Lookup(token string) (Identity, bool) {
	d := sha256.Sum256([]byte(token))
	var found Identity
	match := 0
	for i := range t.entries {
		if subtle.ConstantTimeCompare(d[:], t.entries[i].digest[:]) == 1 {
			found, match = t.entries[i].id, 1
		}
	}
	return found, match == 1
}
