package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// What --confirm cannot do is a usage error, before any output exists.
func TestConfirmUsage(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "tagged.jsonl")
	for _, tt := range []struct {
		args []string
		want string
	}{
		{[]string{"tag", "--confirm", "--append"}, "--append needs -o FILE"},
		{[]string{"tag", "--confirm", "-o", out}, "--confirm needs --append"},
		{[]string{"tag", "--confirm", "--append", "-o", out, "chat.jsonl"}, "not from files"},
		{[]string{"tag", "--confirm", "--append", "-o", out + ".gz"}, "uncompressed"},
		{[]string{"tag", "--confirm", "--append", "-o", out, "--format", "csv"}, "not CSV or TSV"},
		{[]string{"tag", "--confirm", "--append", "-o", out, "--begin-mark", "X", "--commit-mark", "X"}, "two different"},
		{[]string{"tag", "--fsync", "--append", "-o", out}, "--fsync is for --confirm"},
	} {
		code, stdout, stderr := runCmd(t, "", tt.args...)
		if code != exitUsage || !strings.Contains(stderr, tt.want) || stdout != "" {
			t.Errorf("%q: exit %d, stdout %q, stderr %q; want exit %d and %q", tt.args, code, stdout, stderr, exitUsage, tt.want)
		}
	}
	if _, err := os.Stat(out); err == nil {
		t.Errorf("a refused run created %s", out)
	}
}

// Through the command: stdout carries the protocol's replies and nothing
// else, and the records are in -o FILE.
func TestConfirmCommand(t *testing.T) {
	dir := t.TempDir()
	m := tagModel(t, dir, "m.safetensors", []string{"crossing", "weather"}, 1)
	out := filepath.Join(dir, "tagged.jsonl")
	in := "{\"msg\":\"ferry late\"}\nBEGIN TRANSACTION\n{\"msg\":\"fog at Holm\"}\n{\"msg\":\"wind\"}\nCOMMIT TRANSACTION\n"
	code, stdout, stderr := runCmd(t, in, "tag", "-m", m, "-k", "msg", "--confirm", "--fsync", "--append", "-o", out, "--stats")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if want := "OK\nOK\nOK\nDEFER_COMMIT\nDEFER_COMMIT\nOK\n"; stdout != want {
		t.Fatalf("stdout %q, want %q", stdout, want)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(string(b), "\"tag\":"); n != 3 || strings.Count(string(b), "\n") != 3 {
		t.Fatalf("file %q: want 3 tagged records", b)
	}
}
