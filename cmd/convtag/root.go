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

const exitHelp = `Exit status:
  0  success
  1  runtime failure (unreadable input, write error, interrupted)
  2  usage error or unusable model file
  3  records rejected under --strict`

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
}

// loadModel opens the model file at path, or the built-in model when path
// is empty. A model that cannot be used is a usage-class error.
func (a *app) loadModel(path string) (*model.Model, error) {
	if path == "" {
		m, err := builtin.Open()
		return m, withCode(exitUsage, err)
	}
	m, err := model.Open(path)
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

` + exitHelp,
		Version:       version,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetIn(a.stdin)
	root.SetOut(a.stdout)
	root.SetErr(a.stderr)
	root.SetVersionTemplate("convtag {{.Version}}\n")
	for _, c := range commands {
		root.AddCommand(c(a))
	}
	return root
}

// run is the whole program: it parses args, runs a command and returns the
// exit status. Tests call it in memory.
func run(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	model.Version = version
	if path := os.Getenv("CONVTAG_CPUPROFILE"); path != "" { // for developers; see DEVELOPERS.md
		if stop, err := startCPUProfile(path); err == nil {
			defer stop()
		}
	}
	a := &app{stdin: stdin, stdout: stdout, stderr: stderr}
	root := newRoot(a)
	root.SetArgs(defaultToTag(root, args))
	err := root.Execute()
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
	// cobra's own errors (unknown flag, bad argument count) are usage errors.
	if strings.Contains(err.Error(), "flag") || strings.Contains(err.Error(), "arg") || strings.Contains(err.Error(), "unknown command") {
		fmt.Fprintf(stderr, "try: convtag %s --help\n", commandName(root, args))
		return exitUsage
	}
	return exitFailure
}

// defaultToTag makes "convtag [flags] [FILE...]" mean "convtag tag ...".
func defaultToTag(root *cobra.Command, args []string) []string {
	if len(args) == 0 {
		return []string{"tag"}
	}
	first := args[0]
	switch first {
	case "-h", "--help", "--version", "-v", "help", "completion", "__complete", "__completeNoDesc":
		return args
	}
	for _, c := range root.Commands() {
		if c.Name() == first || slices.Contains(c.Aliases, first) {
			return args
		}
	}
	return append([]string{"tag"}, args...)
}

func commandName(root *cobra.Command, args []string) string {
	if c, _, err := root.Find(defaultToTag(root, args)); err == nil && c != root {
		return c.Name()
	}
	return ""
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
