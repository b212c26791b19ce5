package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"runtime/pprof"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"convtag/model"
	"convtag/model/builtin"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

// Exit codes, documented in --help and the README.
const (
	exitOK       = 0 // success
	exitFailure  = 1 // runtime failure: unreadable input, write error, interrupted
	exitUsage    = 2 // usage error or unusable model file
	exitRejected = 3 // records were rejected and --strict was given
)

// exitHelp is the exit-status list of commands without --strict;
// exitHelpStrict that of tag (and of convtag, which runs tag).
const (
	exitHelp = `Exit status:
  0  success
  1  runtime failure (unreadable input, write error, interrupted by SIGINT or SIGTERM)
  2  usage error or unusable model file`
	exitHelpStrict = exitHelp + `
  3  records rejected under --strict`
)

// exitError carries its own exit code.
type exitError struct {
	code int
	err  error
	hint string
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// ExitCode is the process exit status for e.
func (e *exitError) ExitCode() int { return e.code }

func usageErr(hint string, format string, a ...any) error {
	return &exitError{code: exitUsage, err: fmt.Errorf(format, a...), hint: hint}
}

func withCode(code int, err error) error {
	if err == nil {
		return nil
	}
	return &exitError{code: code, err: err}
}

// app is what every command shares: the standard streams and how to load
// a model.
type app struct {
	stdin          io.Reader
	stdout, stderr io.Writer
	scorer         string // tag --scorer: applied to every model tag loads, reloads included
}

// loadModel opens the model file at path, or the built-in model when path
// is empty. A model that cannot be used is a usage-class error.
func (a *app) loadModel(path string) (*model.Model, error) {
	var m *model.Model
	var err error
	if path == "" {
		m, err = builtin.Open()
	} else {
		m, err = model.Open(path)
	}
	if err == nil && a.scorer != "" {
		var sc model.Scorer
		if sc, err = model.ParseScorer(m, a.scorer); err != nil {
			m.Close()
			return nil, withCode(exitUsage, fmt.Errorf("--scorer %s: %w", a.scorer, err))
		}
		m.Scorer = sc
	}
	return m, withCode(exitUsage, err)
}

// commands lists every sub-command constructor; each command's file adds
// its own in an init function.
var commands []func(*app) *cobra.Command

func newRoot(a *app) *cobra.Command {
	root := &cobra.Command{
		Use:   "convtag",
		Short: "Tag every line of a text stream by category with a small convolutional network",
		Long: `convtag tags every record of a chat log, ticket dump or log stream by category,
in order and without losing a record, with a 1-D convolutional network that
runs on the CPU. With no command it runs "convtag tag".

` + exitHelpStrict,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetIn(a.stdin)
	root.SetOut(a.stdout)
	root.SetErr(a.stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return usageErr("convtag "+c.Name()+" --help", "%v", err)
	})
	for _, c := range commands {
		sub := c(a)
		if sub.Args != nil {
			check := sub.Args
			sub.Args = func(c *cobra.Command, args []string) error {
				if err := check(c, args); err != nil {
					return usageErr("convtag "+c.Name()+" --help", "%v", err)
				}
				return nil
			}
		}
		root.AddCommand(sub)
	}
	registerCompletions(a, root)
	return root
}

// run is the whole program: it parses args, runs a command and returns the
// exit status. Tests call it in memory.
func run(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	if path := os.Getenv("CONVTAG_CPUPROFILE"); path != "" { // for developers; see DEVELOPERS.md
		if stop, err := startCPUProfile(path); err == nil {
			defer stop()
		}
	}
	a := &app{stdin: stdin, stdout: stdout, stderr: stderr}
	root := newRoot(a)
	args, err := defaultToTag(root, args)
	if err == nil {
		root.SetArgs(args)
		err = root.Execute()
	}
	if err == nil {
		return exitOK
	}
	fmt.Fprintf(stderr, "convtag: %s\n", oneLine(err.Error()))
	var ee *exitError
	if errors.As(err, &ee) {
		if ee.hint != "" {
			fmt.Fprintf(stderr, "try: %s\n", ee.hint)
		}
		return ee.code
	}
	return exitFailure
}

// defaultToTag makes "convtag [flags] [FILE...]" mean "convtag tag ...".
// A first word that is no existing file but looks like a mistyped command
// ("trian") is a usage error, not an input name: taken as tag's input, it
// would have tag write over the -o file the user meant for another command.
func defaultToTag(root *cobra.Command, args []string) ([]string, error) {
	if len(args) == 0 {
		return []string{"tag"}, nil
	}
	first := args[0]
	switch first {
	case "--version":
		return append([]string{"version"}, args[1:]...), nil
	case "-h", "--help", "help", "completion", "__complete", "__completeNoDesc":
		return args, nil
	}
	for _, c := range root.Commands() {
		if c.Name() == first || slices.Contains(c.Aliases, first) {
			return args, nil
		}
	}
	if guess := likelyCommand(root, first); guess != "" {
		return nil, usageErr("convtag "+guess+" --help", "unknown command %q (no file of that name either); did you mean %s?", first, guess)
	}
	if commandLike(first) {
		return nil, usageErr("convtag --help", "unknown command %q (no file of that name either); the commands are %s", first, commandList(root))
	}
	return append([]string{"tag"}, args...), nil
}

// commandLike reports whether word, which names no existing file, reads as
// a command word rather than a file name: lowercase letters and inner
// hyphens only, as every command name is. Data files nearly always have a
// suffix or a path, so "convtag versoin" or "convtag run" is taken for a
// command that does not exist rather than for an input that is missing.
func commandLike(word string) bool {
	if word == "" || word[0] == '-' || word[len(word)-1] == '-' {
		return false
	}
	for _, r := range word {
		if (r < 'a' || r > 'z') && r != '-' {
			return false
		}
	}
	_, err := os.Lstat(word)
	return err != nil
}

// commandList names the commands a user can give, comma-separated.
func commandList(root *cobra.Command) string {
	var names []string
	for _, c := range root.Commands() {
		if c.IsAvailableCommand() {
			names = append(names, c.Name())
		}
	}
	return strings.Join(names, ", ")
}

// likelyCommand returns the command that word is probably a typing slip
// for, or "" when word names an existing file, starts with '-' or '.', or
// is not close to any command name.
func likelyCommand(root *cobra.Command, word string) string {
	if word == "" || strings.ContainsAny(word[:1], "-.") || strings.ContainsRune(word, '/') {
		return ""
	}
	if _, err := os.Lstat(word); err == nil {
		return ""
	}
	word = strings.ToLower(word)
	best, bestDist := "", 3
	for _, c := range root.Commands() {
		if !c.IsAvailableCommand() && c.Name() != "help" {
			continue
		}
		name := c.Name()
		d := editDistance(word, name)
		limit := 2
		if len(name) <= 4 {
			limit = 1
		}
		if d <= limit && d < bestDist {
			best, bestDist = name, d
		}
	}
	return best
}

// editDistance is the Damerau–Levenshtein distance (optimal string
// alignment: insertions, deletions, substitutions and swaps of two
// neighbouring letters each cost 1) between a and b, byte-wise.
func editDistance(a, b string) int {
	prev2 := make([]int, len(b)+1)
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
			if i > 1 && j > 1 && a[i-1] == b[j-2] && a[i-2] == b[j-1] {
				cur[j] = min(cur[j], prev2[j-2]+1)
			}
		}
		prev2, prev, cur = prev, cur, prev2
	}
	return prev[len(b)]
}

func oneLine(s string) string { return strings.ReplaceAll(strings.TrimSpace(s), "\n", "; ") }

// startCPUProfile writes a CPU profile of the whole run to path.
func startCPUProfile(path string) (stop func(), err error) {
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		f.Close()
		return nil, err
	}
	return func() { pprof.StopCPUProfile(); f.Close() }, nil
}
