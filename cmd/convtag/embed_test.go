package main

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"convtag/model"
	"convtag/model/vectors"
)

// embedCorpus invents chat lines in which the words of each group share
// their contexts: a line is about one group, with filler words common to
// all lines.
func embedCorpus(lines int) (string, [][]string) {
	groups := [][]string{
		{"ferry", "launch", "skiff"},
		{"kelpholm", "saltery", "brinwick"},
		{"delayed", "cancelled", "rerouted"},
		{"ticket", "voucher", "pass"},
	}
	fill := []string{"the", "is", "at", "and"}
	rng := rand.New(rand.NewPCG(3, 4))
	var sb strings.Builder
	for range lines {
		g := groups[rng.IntN(len(groups))]
		for i := range 5 + rng.IntN(6) {
			if i > 0 {
				sb.WriteByte(' ')
			}
			if rng.IntN(3) == 0 {
				sb.WriteString(fill[rng.IntN(len(fill))])
			} else {
				w := g[rng.IntN(len(g))]
				if rng.IntN(4) == 0 {
					w = strings.ToUpper(w[:1]) + w[1:] // the tokenizer folds case
				}
				sb.WriteString(w)
			}
		}
		sb.WriteByte('\n')
	}
	return sb.String(), groups
}

func readVectors(t *testing.T, path string) *vectors.Set {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s, err := vectors.Read(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return s
}

func TestEmbed(t *testing.T) {
	dir := t.TempDir()
	text, groups := embedCorpus(2000)
	in := filepath.Join(dir, "chat.txt")
	if err := os.WriteFile(in, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	common := []string{"--vector-size", "12", "--passes", "3", "--thin-above", "0", "-j", "1", "--seed", "7", "-q"}
	txt, bin := filepath.Join(dir, "v.txt"), filepath.Join(dir, "v.bin")
	if code, _, errs := runCmd(t, "", append([]string{"embed", "-o", txt, in}, common...)...); code != exitOK {
		t.Fatalf("embed: exit %d: %s", code, errs)
	}
	if code, _, errs := runCmd(t, "", append([]string{"embed", "-o", bin, "--binary", in}, common...)...); code != exitOK {
		t.Fatalf("embed --binary: exit %d: %s", code, errs)
	}
	// Standard input gives the same vectors as the file (-j 1, same seed).
	code, out, errs := runCmd(t, text, append([]string{"embed", "-o", "-"}, common...)...)
	if code != exitOK {
		t.Fatalf("embed from stdin: exit %d: %s", code, errs)
	}
	a, b := readVectors(t, txt), readVectors(t, bin)
	c, err := vectors.Read(strings.NewReader(out))
	if err != nil {
		t.Fatal(err)
	}
	if a.Len() != 16 || a.Dim != 12 {
		t.Fatalf("%d words of dim %d, want 16 of 12", a.Len(), a.Dim)
	}
	for name, s := range map[string]*vectors.Set{"binary": b, "stdin": c} {
		if !slices.Equal(s.Words, a.Words) || !slices.Equal(s.Vecs, a.Vecs) {
			t.Errorf("%s vectors differ from the text file's", name)
		}
	}

	// --similar-to: the group mates come first.
	code, out, errs = runCmd(t, "", "embed", "--similar-to", "Ferry", "--similar-to", "voucher", "--count", "2", "--from", txt)
	if code != exitOK {
		t.Fatalf("--similar-to: exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 4 {
		t.Fatalf("--similar-to printed %q", out)
	}
	for i, want := range [][]string{groups[0], groups[3]} {
		var got []string
		for r, l := range lines[2*i : 2*i+2] {
			f := strings.Split(l, "\t")
			if len(f) != 4 || !slices.Contains(want, f[0]) || f[1] != strconv.Itoa(r+1) {
				t.Fatalf("line %q: want query, rank %d, word, cosine", l, r+1)
			}
			got = append(got, f[2])
		}
		for _, g := range got {
			if !slices.Contains(want, g) {
				t.Errorf("neighbours %v of %s, want words of %v", got, want, want)
			}
		}
	}
}

func TestEmbedJSONAndProgress(t *testing.T) {
	dir := t.TempDir()
	text, _ := embedCorpus(300)
	var sb strings.Builder
	for i, l := range strings.Split(strings.TrimSpace(text), "\n") {
		fmt.Fprintf(&sb, `{"ts": %d, "msg": {"body": %q}}`+"\n", i, l)
		if i == 10 {
			sb.WriteString("{broken\n")
		}
	}
	in := filepath.Join(dir, "chat.jsonl")
	if err := os.WriteFile(in, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "v.txt")
	code, _, errs := runCmd(t, "", "embed", "-o", out, "--text-key", "msg.body", "--vector-size", "8", "--passes", "2", "-j", "1", in)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{
		"1 records skipped",
		in + ":12: malformed JSON",
		"counting · ",
		"pass 2/2 · 100% · ",
		" · rate 0.",
		" tokens/s",
		" · took ",
		"from 300 records",
	} {
		if !strings.Contains(errs, want) {
			t.Errorf("stderr lacks %q:\n%s", want, errs)
		}
	}
	if s := readVectors(t, out); s.Len() != 16 {
		t.Errorf("%d words, want 16", s.Len())
	}
}

func TestEmbedErrors(t *testing.T) {
	dir := t.TempDir()
	vec := filepath.Join(dir, "v.txt")
	if err := os.WriteFile(vec, []byte("1 2\nferry 1 2\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	bad := filepath.Join(dir, "bad.txt")
	if err := os.WriteFile(bad, []byte("2 2\nferry 1 2\nquay 1\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"embed", "in.txt"}, exitUsage, "no output file"},
		{[]string{"embed", "-o", "x", "--vector-size", "0"}, exitUsage, "--vector-size 0"},
		{[]string{"embed", "-o", "x", "--thin-above", "-1"}, exitUsage, "--thin-above"},
		{[]string{"embed", "--similar-to", "ferry"}, exitUsage, "--from"},
		{[]string{"embed", "--similar-to", "ferry", "--from", vec, "-o", "x"}, exitUsage, "no -o"},
		{[]string{"embed", "--similar-to", "quay", "--from", vec}, exitFailure, `"quay" is not in`},
		{[]string{"embed", "--similar-to", "ferry", "--from", bad}, exitFailure, "bad.txt: vectors: line 3: wrong number of values"},
		{[]string{"embed", "-o", filepath.Join(dir, "o"), filepath.Join(dir, "missing.txt")}, exitFailure, "missing.txt"},
		{[]string{"embed", "-o", filepath.Join(dir, "o"), vec}, exitFailure, "no word reaches the minimum count"},
	} {
		code, _, errs := runCmd(t, "", tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.msg) || !strings.HasPrefix(errs, "convtag: ") {
			t.Errorf("%v: exit %d, stderr %q; want exit %d mentioning %q", tc.args, code, errs, tc.code, tc.msg)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "o")); !os.IsNotExist(err) {
		t.Errorf("a failed run left an output file: %v", err)
	}
}

// TestCompressedVectors: a vectors file compressed with Debian's gzip or
// zstd tools is read like the plain one, by --similar-to and by train
// --vectors (same listing, same model file).
func TestCompressedVectors(t *testing.T) {
	dir := t.TempDir()
	text, _ := embedCorpus(500)
	in := filepath.Join(dir, "chat.txt")
	os.WriteFile(in, []byte(text), 0o644)
	vec := filepath.Join(dir, "v.wordvec.txt")
	if code, _, errs := runCmd(t, "", "embed", "-o", vec, "--vector-size", "8", "--passes", "1", "--thin-above", "0", "-j", "1", "-q", in); code != exitOK {
		t.Fatalf("embed: exit %d: %s", code, errs)
	}
	files := map[string]string{}
	for tool, suffix := range map[string]string{"gzip": ".gz", "zstd": ".zst"} {
		if _, err := exec.LookPath(tool); err != nil {
			if os.Getenv("CI") != "" {
				t.Fatalf("%s is not installed", tool)
			}
			t.Logf("%s not installed: case skipped", tool)
			continue
		}
		if out, err := exec.Command(tool, "-kq", vec).CombinedOutput(); err != nil {
			t.Fatalf("%s: %v: %s", tool, err, out)
		}
		files[tool] = vec + suffix
	}
	_, want, _ := runCmd(t, "", "embed", "--similar-to", "ferry", "--count", "3", "--from", vec)
	plainModel := filepath.Join(dir, "plain.safetensors")
	trainArgs := func(out, v string) []string {
		return []string{"train", "-q", "-o", out, "--vectors", v, "--filters", "4", "--unseen-rows", "8", "--epochs", "1", "-j", "1",
			"--dev", "../../testdata/demo/dev.jsonl", "../../testdata/demo/train.jsonl"}
	}
	if code, _, errs := runCmd(t, "", trainArgs(plainModel, vec)...); code != exitOK {
		t.Fatalf("train --vectors: exit %d: %s", code, errs)
	}
	for tool, p := range files {
		code, got, errs := runCmd(t, "", "embed", "--similar-to", "ferry", "--count", "3", "--from", p)
		if code != exitOK || got != want {
			t.Errorf("%s: --similar-to: exit %d, %q, want %q (%s)", tool, code, got, want, errs)
		}
		m := filepath.Join(dir, tool+".safetensors")
		if code, _, errs := runCmd(t, "", trainArgs(m, p)...); code != exitOK {
			t.Errorf("%s: train --vectors: exit %d: %s", tool, code, errs)
			continue
		}
		// The tensors are the same (the training record names the file).
		if got, want := tensorChecksum(t, m), tensorChecksum(t, plainModel); got != want {
			t.Errorf("%s: train --vectors gave other tensors than the plain file (%s, %s)", tool, got, want)
		}
	}
}

// tensorChecksum is the model file's stored checksum of its tensor data.
func tensorChecksum(t *testing.T, path string) string {
	t.Helper()
	m, err := model.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	return m.Info().Checksum
}
