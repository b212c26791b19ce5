package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestManPages writes the manual pages and renders each with man-db's
// "man -l" (Debian's man-db package, installed by .ci/run): every command
// has a page, and the tag page carries its flags and the exit statuses.
func TestManPages(t *testing.T) {
	dir := t.TempDir()
	if code, _, errs := runCmd(t, "", "man", dir); code != exitOK {
		t.Fatalf("man: exit %d: %s", code, errs)
	}
	for _, c := range []string{"", "-tag", "-train", "-eval", "-inspect", "-embed", "-join", "-version"} {
		if _, err := os.Stat(filepath.Join(dir, "convtag"+c+".1")); err != nil {
			t.Errorf("no page for convtag%s: %v", c, err)
		}
	}
	man, err := exec.LookPath("man")
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("man is not installed (Debian package man-db)")
		}
		t.Skip("man is not installed (Debian package man-db); pages not rendered")
	}
	cmd := exec.Command(man, "-l", filepath.Join(dir, "convtag-tag.1"))
	cmd.Env = append(os.Environ(), "MANWIDTH=100", "MANPAGER=cat", "PAGER=cat", "MAN_KEEP_FORMATTING=0")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("man -l: %v: %s", err, out)
	}
	text := string(out)
	for _, want := range []string{"convtag-tag", "--min-confidence", "--keep", "Exit status", "records rejected under --strict"} {
		if !strings.Contains(text, want) {
			t.Errorf("rendered tag page lacks %q", want)
		}
	}
}

// TestCompletion: shell completion offers, for each flag with a fixed set
// of values, only values the command accepts, and for --keep and --drop
// the tags of the model given with -m.
func TestCompletion(t *testing.T) {
	for cmd, flags := range fixedValues {
		for flag, values := range flags {
			code, out, errs := runCmd(t, "", "__complete", cmd, "--"+flag, "")
			if code != exitOK {
				t.Fatalf("%s --%s: exit %d: %s", cmd, flag, code, errs)
			}
			got := strings.Fields(out)
			if len(got) != len(values)+1 || got[len(got)-1][0] != ':' {
				t.Errorf("%s --%s completes to %q, want %q", cmd, flag, got, values)
				continue
			}
			for _, v := range values {
				// The command takes the value: any error it gives is not
				// about this flag.
				_, _, errs := runCmd(t, "", cmd, "--"+flag, v, "-o", filepath.Join(t.TempDir(), "x"), "/nonexistent/input")
				if strings.Contains(errs, "--"+flag) {
					t.Errorf("%s --%s %s: %s", cmd, flag, v, errs)
				}
			}
		}
	}
	_, out, _ := runCmd(t, "", "__complete", "tag", "-m", fixture(t), "--keep", "spam,")
	got := strings.Fields(out)
	want := []string{"spam,lost-and-found", "spam,praise", "spam,schedule", "spam,spam", "spam,tickets", "spam,unsure"}
	if strings.Join(got[:len(got)-1], " ") != strings.Join(want, " ") {
		t.Errorf("--keep completes to %q, want %q", got, want)
	}
}
