package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// shardParts writes n parts of in with tag --shard K/N into dir as
// part-K.jsonl and returns their paths.
func shardParts(t *testing.T, in, dir string, n int) []string {
	t.Helper()
	os.MkdirAll(dir, 0o755)
	var paths []string
	for k := 1; k <= n; k++ {
		p := filepath.Join(dir, fmt.Sprintf("part-%d.jsonl", k))
		if code, _, errs := runCmd(t, "", "tag", "--shard", fmt.Sprintf("%d/%d", k, n), "-o", p, in); code != exitOK {
			t.Fatalf("%d/%d: exit %d: %s", k, n, code, errs)
		}
		paths = append(paths, p)
	}
	return paths
}

// TestJoin: join puts the parts of tag --shard back in the order of K
// whatever the order of its arguments, byte-identical to one run over the
// whole file; it refuses, writing nothing, when a part is missing, has no
// stats file (its task did not finish), changed size since its task, comes
// from another run or is given twice, and --missing lists the parts to run
// again as sbatch --array takes them.
func TestJoin(t *testing.T) {
	dir := t.TempDir()
	chat, err := os.ReadFile("../../testdata/demo/chat.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	in := filepath.Join(dir, "chat.jsonl")
	os.WriteFile(in, bytes.Repeat(chat, 5), 0o644)
	whole := filepath.Join(dir, "whole.jsonl")
	if code, _, errs := runCmd(t, "", "tag", "-o", whole, in); code != exitOK {
		t.Fatalf("whole: exit %d: %s", code, errs)
	}
	want, _ := os.ReadFile(whole)
	parts := shardParts(t, in, filepath.Join(dir, "p"), 12)
	shuffled := append([]string{}, parts[7:]...)
	shuffled = append(shuffled, parts[:7]...) // part-10 before part-2, as a glob sorts them
	joined := filepath.Join(dir, "joined.jsonl")
	if code, _, errs := runCmd(t, "", append([]string{"join", "-o", joined}, shuffled...)...); code != exitOK {
		t.Fatalf("join: exit %d: %s", code, errs)
	}
	if got, _ := os.ReadFile(joined); !bytes.Equal(got, want) {
		t.Errorf("joined parts differ from the whole run (%d vs %d bytes)", len(got), len(want))
	}
	if code, out, errs := runCmd(t, "", append([]string{"join"}, parts...)...); code != exitOK || out != string(want) {
		t.Errorf("join to stdout: exit %d, %d bytes: %s", code, len(out), errs)
	}
	if code, out, errs := runCmd(t, "", append([]string{"join", "--missing"}, parts...)...); code != exitOK || out != "" {
		t.Errorf("--missing on a whole set: exit %d, %q, %s", code, out, errs)
	}

	// Parts 2 and 5-7 gone, part 9 without its stats file (its task
	// stopped before the end), part 11 longer than its task wrote.
	for _, k := range []int{2, 5, 6, 7} {
		os.Remove(parts[k-1])
		os.Remove(parts[k-1] + shardStatsSuffix)
	}
	os.Remove(parts[8] + shardStatsSuffix)
	f, _ := os.OpenFile(parts[10], os.O_APPEND|os.O_WRONLY, 0)
	f.WriteString("{\"text\":\"added\"}\n")
	f.Close()
	var left []string
	for _, p := range parts {
		if _, err := os.Stat(p); err == nil {
			left = append(left, p)
		}
	}
	code, out, errs := runCmd(t, "", append([]string{"join", "--missing"}, left...)...)
	if code != exitOK || out != "2,5-7,9,11\n" || !strings.Contains(errs, "part-9.jsonl: no ") || !strings.Contains(errs, "part-11.jsonl: ") {
		t.Errorf("--missing: exit %d, %q, %s", code, out, errs)
	}
	os.Remove(joined)
	code, _, errs = runCmd(t, "", append([]string{"join", "-o", joined}, left...)...)
	if code != exitFailure || !strings.Contains(errs, "6 of 12 parts of chat.jsonl missing or incomplete: 2,5-7,9,11") {
		t.Errorf("join of an incomplete set: exit %d, %s", code, errs)
	}
	if _, err := os.Stat(joined); err == nil {
		t.Error("join of an incomplete set wrote its output")
	}

	// Parts of another run, and one part given twice.
	other := shardParts(t, in, filepath.Join(dir, "q"), 3)
	code, _, errs = runCmd(t, "", "join", parts[0], other[1])
	if code != exitFailure || !strings.Contains(errs, "parts of different runs") {
		t.Errorf("parts of two runs: exit %d, %s", code, errs)
	}
	twin := filepath.Join(dir, "q", "copy.jsonl")
	b, _ := os.ReadFile(other[0])
	os.WriteFile(twin, b, 0o644)
	b, _ = os.ReadFile(other[0] + shardStatsSuffix)
	os.WriteFile(twin+shardStatsSuffix, b, 0o644)
	code, _, errs = runCmd(t, "", "join", other[0], twin, other[1], other[2])
	if code != exitFailure || !strings.Contains(errs, "are both part 1/3") {
		t.Errorf("one part twice: exit %d, %s", code, errs)
	}
	code, _, errs = runCmd(t, "", "join", "-o", other[0], other[0], other[1], other[2])
	if code != exitUsage || !strings.Contains(errs, "is one of the parts") {
		t.Errorf("-o onto a part: exit %d, %s", code, errs)
	}
}

func TestArrayList(t *testing.T) {
	for _, c := range []struct {
		in   []int
		want string
	}{
		{nil, ""}, {[]int{3}, "3"}, {[]int{1, 2}, "1-2"}, {[]int{7, 3, 5, 6}, "3,5-7"}, {[]int{1, 2, 3, 9, 11, 12}, "1-3,9,11-12"},
	} {
		if got := arrayList(c.in); got != c.want {
			t.Errorf("arrayList(%v) = %q, want %q", c.in, got, c.want)
		}
	}
}
