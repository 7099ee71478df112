package main

import (
	"bufio"
	"bytes"
	"context"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"goniod/daemon/server/servertest"
)

// readmeBlock is a fenced block of the README.
type readmeBlock struct {
	section     string // the "## " heading the block is under
	lang, first string
	line        int
	body        []string
}

func readmeBlocks(t *testing.T) []readmeBlock {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []readmeBlock
	var cur *readmeBlock
	section := ""
	sc := bufio.NewScanner(f)
	for n := 1; sc.Scan(); n++ {
		l := sc.Text()
		switch {
		case cur == nil && strings.HasPrefix(l, "## "):
			section = strings.TrimPrefix(l, "## ")
		case cur == nil && strings.HasPrefix(l, "```"):
			cur = &readmeBlock{section: section, lang: strings.TrimPrefix(l, "```"), line: n + 1}
		case cur != nil && strings.HasPrefix(l, "```"):
			if len(cur.body) > 0 {
				cur.first = cur.body[0]
			}
			out = append(out, *cur)
			cur = nil
		case cur != nil:
			cur.body = append(cur.body, l)
		}
	}
	return out
}

// shellWords splits a command line as a POSIX shell would for the simple lines of the README: words, '…' and
// "…" quotes; it stops at an unquoted # (a comment) and reports the pipe or redirection that ends the command.
func shellWords(line string) (words []string, rest string) {
	var w strings.Builder
	inWord, quote := false, rune(0)
	flush := func() {
		if inWord {
			words = append(words, w.String())
			w.Reset()
			inWord = false
		}
	}
	for i, r := range line {
		switch {
		case quote != 0 && r == quote:
			quote = 0
		case quote != 0:
			w.WriteRune(r)
		case r == '"' || r == '\'':
			quote, inWord = r, true
		case r == ' ' || r == '\t':
			flush()
		case r == '#' && !inWord:
			flush()
			return words, ""
		case r == '|' || r == '>' || r == '<' || r == '&' || r == ';':
			flush()
			return words, line[i:]
		default:
			w.WriteRune(r)
			inWord = true
		}
	}
	flush()
	return words, ""
}

var fileBlock = regexp.MustCompile(`^# (\S+?\.yaml)(:|\s|$)`)

// TestReadmeCommands tries the README's tour as a new user would: every `gonio …` command of the shell blocks
// under "## A short tour" (with its plots, plans, configuration and exit codes) runs, in order, against a daemon on the simulator (standing in for the one the README starts, at $GONIO_ADDR), in a
// scratch directory; YAML blocks headed by a file name (a plan, the configuration file) are written there
// first. A command must exit 0 unless the README says "# exits N". Commands that follow until interrupted run
// for a second.
func TestReadmeCommands(t *testing.T) {
	d := servertest.Start(t, servertest.WithSim("seed", int64(11)))
	t.Setenv("GONIO_ADDR", d.Addr)
	cfgHome := t.TempDir()
	t.Setenv("XDG_CONFIG_HOME", cfgHome)
	blocks := readmeBlocks(t)
	t.Chdir(t.TempDir())
	ran := 0
	for _, b := range blocks {
		if b.section != "A short tour" {
			continue // set-up sections show synopses for remote, secured daemons
		}
		switch b.lang {
		case "yaml":
			if m := fileBlock.FindStringSubmatch(b.first); m != nil {
				writeReadmeFile(t, m[1], b, d.Addr, cfgHome)
			}
			continue
		case "sh":
		default:
			continue
		}
		for i, line := range b.body {
			for _, part := range strings.Split(line, "&&") {
				words, _ := shellWords(part)
				if len(words) == 0 || words[0] != "gonio" {
					continue
				}
				ran++
				wantCode := 0
				if _, comment, ok := strings.Cut(line, "# exits "); ok {
					wantCode = int(comment[0] - '0')
				}
				runReadmeCommand(t, b.line+i, words[1:], wantCode)
			}
		}
	}
	if ran < 25 {
		t.Errorf("ran %d gonio commands of the README; it documents more (is the parser broken?)", ran)
	}
}

func runReadmeCommand(t *testing.T, line int, args []string, wantCode int) {
	t.Helper()
	ctx := context.Background()
	if strings.Contains(strings.Join(args, " "), "--follow") {
		// Interrupted as by Ctrl-C: a cancel, not a deadline, which gRPC would send to the daemon, whose
		// reset can reach gonio before its own timer fires.
		var cancel context.CancelFunc
		ctx, cancel = context.WithCancel(ctx)
		defer time.AfterFunc(time.Second, cancel).Stop()
		defer cancel()
	}
	var out, errb bytes.Buffer
	code := executeContext(ctx, args, strings.NewReader(""), &out, &errb)
	if code != wantCode {
		t.Errorf("README.md:%d: gonio %s: exit %d, want %d\nstdout: %s\nstderr: %s", line, strings.Join(args, " "),
			code, wantCode, out.String(), errb.String())
	}
}

// writeReadmeFile writes a YAML block headed "# NAME.yaml": the configuration file goes where gonio looks for it,
// with the README's local address replaced by the test daemon's and other hosts by an address nothing listens
// on; files it names (token files) are created empty beside it.
func writeReadmeFile(t *testing.T, name string, b readmeBlock, addr, cfgHome string) {
	t.Helper()
	body := strings.Join(b.body, "\n") + "\n"
	path := name
	if strings.HasSuffix(name, "gonio/config.yaml") {
		path = filepath.Join(cfgHome, "gonio", "config.yaml")
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		body = strings.ReplaceAll(body, "127.0.0.1:7461", addr)
		body = regexp.MustCompile(`addr: [a-z][\w.-]*:\d+`).ReplaceAllString(body, "addr: 127.0.0.1:1")
		for _, m := range regexp.MustCompile(`token_file: (\S+?)[,}\s]`).FindAllStringSubmatch(body, -1) {
			if err := os.WriteFile(filepath.Join(cfgHome, "gonio", m[1]), nil, 0o600); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
}
