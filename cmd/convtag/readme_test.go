package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"convtag/model/builtin"
)

// readmeCommands returns every convtag invocation in the README's indented
// code blocks, as words, from the word after "convtag" to the end of that
// command in its pipeline; run is true for the worked example's "$ convtag"
// lines, which the README shows being run.
func readmeCommands(t *testing.T, root *cobra.Command) (cmds [][]string, run []bool) {
	t.Helper()
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	text := string(b)
	// The commands' own --help examples are held to the same rules.
	for _, c := range root.Commands() {
		for _, l := range strings.Split(c.Example, "\n") {
			text += "\n    " + strings.TrimSpace(l)
		}
	}
	call := regexp.MustCompile(`(?:^|[\s|"'/])convtag\s+([^|>&;"']*)`)
	for _, line := range strings.Split(text, "\n") {
		if !strings.HasPrefix(line, "    ") || strings.HasPrefix(strings.TrimSpace(line), "#") {
			continue
		}
		for _, m := range call.FindAllStringSubmatch(line, -1) {
			words := strings.Fields(m[1])
			if i := slices.Index(words, "<"); i >= 0 {
				words = words[:i]
			}
			cmds = append(cmds, words)
			run = append(run, strings.HasPrefix(strings.TrimSpace(line), "$ convtag "))
		}
	}
	if len(cmds) < 10 {
		t.Fatalf("found only %d convtag commands in the README", len(cmds))
	}
	return cmds, run
}

// TestReadmeCommands: every convtag command the README and the --help
// examples print uses a
// command and flags that exist, --keep/--drop name tags the model has (the
// demo model, trained as the README says, for "-m ferry.safetensors"; the
// built-in one without -m), and the worked example's "$ convtag" lines run
// as printed, in order, from the repository's root, with exit status 0.
func TestReadmeCommands(t *testing.T) {
	bin := binary(t)
	dir := t.TempDir()
	if err := os.Symlink(mustAbs(t, "../../testdata"), filepath.Join(dir, "testdata")); err != nil {
		t.Fatal(err)
	}
	root := newRoot(&app{})
	builtinModel, err := builtin.Open()
	defer builtinModel.Close()
	if err != nil {
		t.Fatal(err)
	}
	labels := map[string][]string{"": append(builtinModel.Labels, "unsure")}
	cmds, run := readmeCommands(t, root)
	for i, words := range cmds {
		line := "convtag " + strings.Join(words, " ")
		if len(words) > 0 && words[0] == "--version" {
			continue // the root's own flag (defaultToTag)
		}
		sub := root
		args := words
		if len(args) > 0 {
			if c, _, err := root.Find(args[:1]); err == nil && c != root {
				sub, args = c, args[1:]
			} else if len(args) == 0 || !strings.HasPrefix(args[0], "-") && args[0] != "MODEL" {
				sub = mustFind(t, root, "tag")
			}
		}
		if sub == root {
			sub = mustFind(t, root, "tag")
		}
		modelPath := ""
		for j := 0; j < len(args); j++ {
			w := args[j]
			if !strings.HasPrefix(w, "-") || w == "-" {
				continue
			}
			name, value, hasValue := strings.Cut(strings.TrimLeft(w, "-"), "=")
			var f *pflag.Flag
			if strings.HasPrefix(w, "--") {
				f = sub.Flags().Lookup(name)
			} else {
				f = sub.Flags().ShorthandLookup(name[:1])
			}
			if f == nil {
				t.Errorf("README: %q: %s has no flag %s", line, sub.Name(), w)
				continue
			}
			if f.Value.Type() != "bool" && !hasValue && j+1 < len(args) {
				j++
				value = args[j]
			}
			switch f.Name {
			case "model":
				modelPath = value
			case "keep", "drop":
				want, ok := labels[modelPath]
				if !ok && filepath.Base(modelPath) == "ferry.safetensors" {
					want = []string{"schedule", "tickets", "lost-and-found", "praise", "spam", "unsure"}
					ok = true
				}
				for _, tag := range strings.Split(value, ",") {
					if ok && !slices.Contains(want, tag) {
						t.Errorf("README: %q: --%s %s, but the model's tags are %v", line, f.Name, tag, want)
					}
				}
			}
		}
		if !run[i] {
			continue
		}
		cmd := exec.Command(bin, words...)
		cmd.Dir = dir
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Errorf("README: %q: %v\n%s", line, err, out)
		}
	}
}

func mustFind(t *testing.T, root *cobra.Command, name string) *cobra.Command {
	t.Helper()
	c, _, err := root.Find([]string{name})
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func mustAbs(t *testing.T, p string) string {
	t.Helper()
	a, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return a
}
