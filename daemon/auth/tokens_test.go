package auth

import (
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

func TestParseTokens(t *testing.T) {
	good := "# lab tokens\n\nviewer ana v-0123456789abcdef\n  operator bo  op-0123456789abcdef  \nadmin cy ad-0123456789abcdef\n"
	tok, err := ParseTokens(strings.NewReader(good))
	if err != nil {
		t.Fatal(err)
	}
	if tok.Len() != 3 {
		t.Fatalf("%d tokens, want 3", tok.Len())
	}
	for _, c := range []struct {
		token string
		want  Identity
		ok    bool
	}{
		{"v-0123456789abcdef", Identity{Name: "ana", Role: Viewer, Via: "token"}, true},
		{"op-0123456789abcdef", Identity{Name: "bo", Role: Operator, Via: "token"}, true},
		{"ad-0123456789abcdef", Identity{Name: "cy", Role: Admin, Via: "token"}, true},
		{"ad-0123456789abcdeF", Identity{}, false},
		{"ad-0123456789abcde", Identity{}, false},
		{"", Identity{}, false},
	} {
		got, ok := tok.Lookup(c.token)
		if ok != c.ok || got != c.want {
			t.Errorf("Lookup(%q) = %+v, %v; want %+v, %v", c.token, got, ok, c.want, c.ok)
		}
	}
}

func TestParseTokensRefuses(t *testing.T) {
	const secret = "s3cret-0123456789"
	cases := []struct {
		name, text, want string
	}{
		{"empty", "# only a comment\n", "no tokens"},
		{"two fields", "viewer " + secret + "\n", "line 1: want 3 fields"},
		{"four fields", "viewer ana " + secret + " extra\n", "line 1: want 3 fields"},
		{"unknown role", "\nroot ana " + secret + "\n", `line 2: unknown role "root"`},
		{"role case", "Viewer ana " + secret + "\n", "unknown role"},
		{"short token", "viewer ana short-s3cret\n", "line 1: TOKEN of ana is shorter than 16"},
		{"control character", "viewer ana " + secret + "\x01\n", "printable ASCII"},
		{"non-ASCII name", "viewer änа " + secret + "\n", "NAME has characters"},
		{"duplicate token", "viewer ana " + secret + "\noperator bo " + secret + "\n", "line 2: the same token as line 1"},
		{"long line", "viewer ana " + strings.Repeat("x", 70000) + "\n", "longer than 64 KiB"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseTokens(strings.NewReader(c.text))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got %v, want an error with %q", err, c.want)
			}
			if strings.Contains(err.Error(), secret) || strings.Contains(err.Error(), "short-s3cret") {
				t.Errorf("error %q shows the token", err)
			}
		})
	}
}

func TestLoadTokensRefusesWorldReadable(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("Unix permissions only")
	}
	dir := t.TempDir()
	path := filepath.Join(dir, "tokens")
	if err := os.WriteFile(path, []byte("operator bo op-0123456789abcdef\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		mode os.FileMode
		ok   bool
	}{{0o600, true}, {0o640, true}, {0o400, true}, {0o644, false}, {0o602, false}, {0o666, false}} {
		if err := os.Chmod(path, c.mode); err != nil {
			t.Fatal(err)
		}
		tok, err := LoadTokens(path)
		if c.ok && (err != nil || tok.Len() != 1) {
			t.Errorf("mode %v: %v, want the file loaded", c.mode, err)
		}
		if !c.ok && (err == nil || !strings.Contains(err.Error(), "chmod 600")) {
			t.Errorf("mode %v: %v, want a refusal saying chmod 600", c.mode, err)
		}
	}
	if _, err := LoadTokens(filepath.Join(dir, "missing")); err == nil {
		t.Error("a missing tokens file loaded")
	}
}

// FuzzParseTokens: any input gives tokens or an error, never a panic, and an error never shows a token.
func FuzzParseTokens(f *testing.F) {
	for _, s := range []string{
		"viewer ana v-0123456789abcdef\n",
		"# c\noperator bo op-0123456789abcdef\nadmin cy ad-0123456789abcdef",
		"viewer\n", "admin x y z\n", "viewer a " + strings.Repeat("k", 16) + "\r\n",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, text string) {
		tok, err := ParseTokens(strings.NewReader(text))
		if err != nil {
			for _, line := range strings.Split(text, "\n") {
				if fs := strings.Fields(line); len(fs) == 3 && len(fs[2]) >= MinTokenLength && strings.Contains(err.Error(), fs[2]) {
					t.Fatalf("error %q shows a token", err)
				}
			}
			return
		}
		if tok.Len() == 0 {
			t.Fatal("no error and no tokens")
		}
	})
}
