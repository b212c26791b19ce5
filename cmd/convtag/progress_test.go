package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// underTerminal runs the convtag binary with stderr on a pseudo-terminal,
// through util-linux's script(1) (Debian's bsdutils, an essential
// package), and returns what the terminal showed, with carriage returns
// turned into line ends.
func underTerminal(t *testing.T, shell string) string {
	t.Helper()
	script, err := exec.LookPath("script")
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("script(1) is not installed (Debian package bsdutils)")
		}
		t.Skip("script(1) is not installed")
	}
	out, err := exec.Command(script, "-qfec", shell, "/dev/null").CombinedOutput()
	if err != nil {
		t.Fatalf("%s: %v\n%s", shell, err, out)
	}
	return strings.ReplaceAll(string(out), "\r", "\n")
}

// TestProgressUnderTerminal: with stderr on a terminal and a file of known
// size, tag draws its bar without being asked; it counts records, ends at
// 100% with the final record count, and the bar's last frame stays above
// the --stats summary, which follows on lines of its own.
func TestProgressUnderTerminal(t *testing.T) {
	bin := binary(t)
	dir := t.TempDir()
	in := filepath.Join(dir, "chat.jsonl")
	demo, err := os.ReadFile("../../testdata/demo/chat.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	n := 60
	if err := os.WriteFile(in, []byte(strings.Repeat(string(demo), n)), 0o644); err != nil {
		t.Fatal(err)
	}
	records := n * strings.Count(string(demo), "\n")
	out := filepath.Join(dir, "out.jsonl")
	screen := underTerminal(t, bin+" tag --stats -o "+out+" "+in)

	final := groupDigits(int64(records)) + " records · "
	i100 := strings.LastIndex(screen, "100%")
	iStats := strings.Index(screen, "convtag: records in")
	switch {
	case i100 < 0:
		t.Fatalf("the bar never reached 100%%:\n%s", screen)
	case iStats < i100:
		t.Fatalf("the summary came before the bar's last frame:\n%s", screen)
	}
	line := screen[strings.LastIndex(screen[:i100], "\n")+1:]
	line = line[:strings.IndexByte(line, '\n')]
	if !strings.HasPrefix(line, final) || !strings.Contains(line, "records/s") {
		t.Errorf("last frame %q, want it to start %q and show records/s", line, final)
	}
	if !strings.Contains(screen[i100:iStats], "\nconvtag: records in") && !strings.HasPrefix(screen[iStats-1:], "\n") {
		t.Errorf("the summary does not start on a line of its own:\n%s", screen[i100:])
	}
	b, err := os.ReadFile(out)
	if err != nil || strings.Count(string(b), "\n") != records {
		t.Errorf("output %d lines (%v), want %d", strings.Count(string(b), "\n"), err, records)
	}
}

// TestProgressOffWithoutTerminal: under auto, no bar unless stderr is a
// terminal and the input size is known (a pipe has none).
func TestProgressOffWithoutTerminal(t *testing.T) {
	bin := binary(t)
	screen := underTerminal(t, "cat ../../testdata/demo/chat.jsonl | "+bin+" tag >/dev/null")
	if strings.Contains(screen, "records/s") || strings.Contains(screen, "%") {
		t.Errorf("a bar for a pipe of unknown size:\n%s", screen)
	}
	// --progress on counts without a total.
	screen = underTerminal(t, "cat ../../testdata/demo/chat.jsonl | "+bin+" tag --progress on >/dev/null")
	if !strings.Contains(screen, "201 records · ") {
		t.Errorf("--progress on over a pipe shows no record count:\n%s", screen)
	}
}

func TestGroupDigits(t *testing.T) {
	for n, want := range map[int64]string{0: "0", 7: "7", 999: "999", 1000: "1,000", 402000: "402,000", 1234567: "1,234,567"} {
		if got := groupDigits(n); got != want {
			t.Errorf("groupDigits(%d) = %q, want %q", n, got, want)
		}
	}
}
