package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestTagShards: N tasks of tag --shard K/N -o part-K.jsonl over one file
// give outputs that, joined in order, are byte-identical to one run over the
// whole file; each part leaves a stats file, written last, whose record
// counts add up; a compressed input is refused with the advice to shard by
// file.
func TestTagShards(t *testing.T) {
	dir := t.TempDir()
	chat, err := os.ReadFile("../../testdata/demo/chat.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	in := filepath.Join(dir, "chat.jsonl")
	data := bytes.Repeat(chat, 7)
	data = append(data, []byte("{\"text\":\"no final newline\"}")...)
	os.WriteFile(in, data, 0o644)
	whole := filepath.Join(dir, "whole.jsonl")
	if code, _, errs := runCmd(t, "", "tag", "-o", whole, in); code != exitOK {
		t.Fatalf("whole: exit %d: %s", code, errs)
	}
	want, _ := os.ReadFile(whole)
	for _, n := range []int{1, 3, 8} {
		var joined bytes.Buffer
		var records int64
		for k := 1; k <= n; k++ {
			part := filepath.Join(dir, fmt.Sprintf("part-%d-of-%d.jsonl", k, n))
			if code, _, errs := runCmd(t, "", "tag", "--shard", fmt.Sprintf("%d/%d", k, n), "-o", part, in); code != exitOK {
				t.Fatalf("%d/%d: exit %d: %s", k, n, code, errs)
			}
			b, _ := os.ReadFile(part)
			joined.Write(b)
			var st shardStats
			sb, err := os.ReadFile(part + ".stats.json")
			if err != nil || json.Unmarshal(sb, &st) != nil || st.Part != k || st.Parts != n || st.Input != "chat.jsonl" {
				t.Fatalf("%d/%d: stats %q, %v", k, n, sb, err)
			}
			records += st.Records
		}
		if !bytes.Equal(joined.Bytes(), want) {
			t.Errorf("N=%d: joined parts differ from the whole run (%d vs %d bytes)", n, joined.Len(), len(want))
		}
		if lines := int64(bytes.Count(data, []byte("\n")) + 1); records != lines {
			t.Errorf("N=%d: parts counted %d records, the file has %d", n, records, lines)
		}
	}
	gz := filepath.Join(dir, "chat.jsonl.gz")
	if out, err := exec.Command("gzip", "-k", in).CombinedOutput(); err != nil {
		t.Fatalf("gzip: %v %s", err, out)
	}
	code, _, errs := runCmd(t, "", "tag", "--shard", "1/2", "-o", filepath.Join(dir, "x.jsonl"), gz)
	if code == exitOK || !strings.Contains(errs, "shard by file") {
		t.Errorf("gzip input: exit %d, %s", code, errs)
	}
	for _, args := range [][]string{{"--shard", "0/2", in}, {"--shard", "1/2"}, {"--shard", "1/2", in, in}, {"--shard", "1/2", "--format", "csv", in}} {
		if code, _, errs := runCmd(t, "", append([]string{"tag"}, args...)...); code != exitUsage {
			t.Errorf("%v: exit %d, %s", args, code, errs)
		}
	}
}
