package main

import (
	"bytes"
	"convtag/model/train"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
	"golang.org/x/sys/cpu"

	"convtag/model"
)

// runCmd drives the whole program in memory, as a shell would.
func runCmd(t *testing.T, stdin string, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	code = run(args, strings.NewReader(stdin), &out, &errb)
	return code, out.String(), errb.String()
}

func TestVersion(t *testing.T) {
	code, out, _ := runCmd(t, "", "--version")
	if code != exitOK || !strings.HasPrefix(out, "convtag "+version+"\n") {
		t.Fatalf("--version: code %d, out %q", code, out)
	}
	code, word, _ := runCmd(t, "", "version")
	if code != exitOK || word != out {
		t.Fatalf("version: code %d, out %q; --version gave %q", code, word, out)
	}
	for _, want := range []string{
		"\nrevision: ",
		"\ngo:       " + runtime.Version() + " " + runtime.GOOS + "/" + runtime.GOARCH + "\n",
		"\nkernels:  " + model.KernelName() + "\n",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("version output %q lacks %q", out, want)
		}
	}
	// The kernel name is one the CPU can run: avx512 only with AVX-512F,
	// and so on (golang.org/x/sys/cpu, independent of the model package).
	switch k := model.KernelName(); {
	case k == "avx512" && !cpu.X86.HasAVX512F, k == "avx2" && !cpu.X86.HasAVX2:
		t.Errorf("kernels %s on a CPU without them", k)
	case k != "avx512" && k != "avx2" && k != "generic":
		t.Errorf("unknown kernel name %q", k)
	}
}

// TestCommandWordsAreNotFiles: a first word that reads as a command and
// names no file is a usage error listing the commands, never a missing
// input of tag (which could go on to create tag's -o file).
func TestCommandWordsAreNotFiles(t *testing.T) {
	dir := t.TempDir()
	keep := filepath.Join(dir, "keep.jsonl")
	if err := os.WriteFile(keep, []byte("precious\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, word := range []string{"run", "classify-all", "predict"} {
		code, out, errs := runCmd(t, "", word, "-o", keep)
		if code != exitUsage || out != "" || !strings.Contains(errs, "unknown command \""+word+"\"") || !strings.Contains(errs, "train") {
			t.Errorf("%s: exit %d, out %q, stderr %q", word, code, out, errs)
		}
	}
	if b, _ := os.ReadFile(keep); string(b) != "precious\n" {
		t.Errorf("-o file now holds %q", b)
	}
	// A file whose name reads like a word is still tag's input.
	t.Chdir(dir)
	if err := os.WriteFile("notes", []byte("hello there\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if code, out, errs := runCmd(t, "", "notes"); code != exitOK || !strings.HasSuffix(out, "\thello there\n") {
		t.Errorf("notes: exit %d, out %q, stderr %q", code, out, errs)
	}
}

func TestUsageErrors(t *testing.T) {
	for _, args := range [][]string{
		{"inspect", "--no-such-flag"},
		{"tag", "--no-such-flag"},
	} {
		code, _, errs := runCmd(t, "", args...)
		if code != exitUsage {
			t.Errorf("%v: exit %d, want %d (stderr %q)", args, code, exitUsage, errs)
		}
		if !strings.HasPrefix(errs, "convtag: ") || !strings.Contains(errs, "try: ") {
			t.Errorf("%v: stderr %q lacks the one-line error and a hint", args, errs)
		}
	}
}

// Every command's help carries a worked example.
func TestHelpHasExamples(t *testing.T) {
	a := &app{}
	for _, c := range newRoot(a).Commands() {
		if c.Name() == "completion" || c.Name() == "help" {
			continue
		}
		if !strings.Contains(c.Example, "convtag "+c.Name()) {
			t.Errorf("%s: --help has no worked example", c.Name())
		}
	}
}

func TestCompletionScript(t *testing.T) {
	code, out, _ := runCmd(t, "", "completion", "bash")
	if code != exitOK || !strings.Contains(out, "convtag") {
		t.Fatalf("completion bash: code %d", code)
	}
}

func TestDefaultToTag(t *testing.T) {
	root := newRoot(&app{})
	for _, tc := range []struct{ in, want string }{
		{"", "tag"},
		{"-m x.safetensors", "tag -m x.safetensors"},
		{"log.jsonl", "tag log.jsonl"},
		{"inspect m", "inspect m"},
		{"--help", "--help"},
		{"--version", "version"},
	} {
		var args []string
		if tc.in != "" {
			args = strings.Fields(tc.in)
		}
		got, err := defaultToTag(root, args)
		if err != nil || strings.Join(got, " ") != tc.want {
			t.Errorf("defaultToTag(%q) = %q, %v, want %q", tc.in, got, err, tc.want)
		}
	}
}

// A mistyped command must not be taken as tag's input file: tag would then
// truncate the -o file the user meant for the other command.
func TestMistypedCommandKeepsOutput(t *testing.T) {
	dir := t.TempDir()
	keep := filepath.Join(dir, "keep.safetensors")
	if err := os.WriteFile(keep, []byte("precious"), 0o644); err != nil {
		t.Fatal(err)
	}
	t.Chdir(dir)
	for _, word := range []string{"trian", "tarin", "evl", "inspcet", "embd"} {
		var stdout, stderr strings.Builder
		code := run([]string{word, "-o", keep, "train.jsonl"}, strings.NewReader(""), &stdout, &stderr)
		if code != exitUsage || !strings.Contains(stderr.String(), "did you mean") || !strings.Contains(stderr.String(), "try:") {
			t.Errorf("%s: exit %d, stderr %q; want exit %d with a suggestion", word, code, stderr.String(), exitUsage)
		}
		if b, _ := os.ReadFile(keep); string(b) != "precious" {
			t.Fatalf("%s: the -o file was changed to %q", word, b)
		}
	}
	// A file that exists under a command-like name is still an input.
	if err := os.WriteFile("trian", []byte("hello there\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if got, err := defaultToTag(newRoot(&app{}), []string{"trian"}); err != nil || strings.Join(got, " ") != "tag trian" {
		t.Errorf("existing file trian: %q, %v", got, err)
	}
}

// Usage mistakes found by cobra carry their exit code as a type (no guess
// from the message's words).
func TestFlagErrorsAreUsage(t *testing.T) {
	for _, args := range [][]string{{"tag", "--no-such-flag"}, {"inspect", "a", "b"}, {"tag", "-j", "x"}} {
		var stdout, stderr strings.Builder
		if code := run(args, strings.NewReader(""), &stdout, &stderr); code != exitUsage || !strings.Contains(stderr.String(), "try:") {
			t.Errorf("%q: exit %d, stderr %q", args, code, stderr.String())
		}
	}
}

// TestRecipeFlags: train and eval --folds both take every flag of the
// recipe (train.Recipe.FlagSet), with the recipe's defaults.
func TestRecipeFlags(t *testing.T) {
	cmds := map[string]*cobra.Command{}
	for _, c := range newRoot(&app{}).Commands() {
		cmds[c.Name()] = c
	}
	r := train.Defaults()
	n := 0
	r.FlagSet().VisitAll(func(rf *pflag.Flag) {
		n++
		for _, name := range []string{"train", "eval"} {
			f := cmds[name].Flags().Lookup(rf.Name)
			if f == nil {
				t.Errorf("%s has no --%s", name, rf.Name)
			} else if f.DefValue != rf.DefValue {
				t.Errorf("%s --%s: default %q, the recipe's %q", name, rf.Name, f.DefValue, rf.DefValue)
			}
		}
	})
	if n < 10 {
		t.Fatalf("only %d recipe flags", n)
	}
}

// TestExitHelpMatchesStrict: a command's help lists exit status 3 exactly
// when it has --strict, and no flag's help shows its default twice.
func TestExitHelpMatchesStrict(t *testing.T) {
	root := newRoot(&app{})
	for _, c := range append(root.Commands(), root) {
		if c.Name() == "help" || c.Name() == "completion" || c.Name() == "man" || c.Name() == "version" {
			continue
		}
		hasStrict := c.Flags().Lookup("strict") != nil || c == root
		lists3 := strings.Contains(c.Long, "3  records rejected under --strict")
		if hasStrict != lists3 {
			t.Errorf("%s: --strict %v but exit status 3 listed %v", c.Name(), hasStrict, lists3)
		}
		c.Flags().VisitAll(func(f *pflag.Flag) {
			if strings.Contains(f.Usage, "default") && f.DefValue != "" && f.DefValue != "0" && f.DefValue != "false" && f.DefValue != "[]" {
				t.Errorf("%s --%s: usage %q names a default and cobra adds (default %s)", c.Name(), f.Name, f.Usage, f.DefValue)
			}
		})
	}
}
