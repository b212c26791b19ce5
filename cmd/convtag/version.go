package main

import (
	"fmt"
	"runtime"
	"runtime/debug"

	"github.com/spf13/cobra"

	"convtag/model"
)

func init() { commands = append(commands, newVersionCmd) }

func newVersionCmd(a *app) *cobra.Command {
	return &cobra.Command{
		Use:   "version",
		Short: "Print the version, the source revision, the Go version and the kernels this CPU runs",
		Long: `version prints what this convtag binary is: the module version, the source
revision and its date (from the build information the Go toolchain records
when building from a git checkout; "+ local changes" when the checkout had
uncommitted edits), the Go version it was built with, and which forward-pass
kernels this CPU runs: avx512, avx2 or generic (plain Go). "convtag
--version" prints the same.`,
		Example: `  convtag version
  convtag --version`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			_, err := fmt.Fprint(a.stdout, versionText())
			return withCode(exitFailure, err)
		},
	}
}

// versionText is what "convtag version" prints.
func versionText() string {
	mod, rev, date, dirty := version, "unknown", "", false
	if bi, ok := debug.ReadBuildInfo(); ok {
		if v := bi.Main.Version; v != "" && v != "(devel)" {
			mod = v
		}
		for _, s := range bi.Settings {
			switch s.Key {
			case "vcs.revision":
				rev = s.Value
			case "vcs.time":
				date = s.Value
			case "vcs.modified":
				dirty = s.Value == "true"
			}
		}
	}
	if date != "" {
		rev += " (" + date + ")"
	}
	if dirty {
		rev += " + local changes"
	}
	return fmt.Sprintf("convtag %s\nrevision: %s\ngo:       %s %s/%s\nkernels:  %s\n",
		mod, rev, runtime.Version(), runtime.GOOS, runtime.GOARCH, model.KernelName())
}
