package main

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"
	"github.com/spf13/cobra/doc"
)

func init() { commands = append(commands, newManCmd) }

func newManCmd(a *app) *cobra.Command {
	return &cobra.Command{
		Use:   "man DIR",
		Short: "Write manual pages for every command into DIR",
		Long: `man writes a manual page in roff (section 1) for convtag and for each of its
commands into DIR, generated from the same definitions as --help:
convtag.1, convtag-tag.1, convtag-train.1 and so on. Read one with
"man -l DIR/convtag-tag.1", or put DIR/.. on MANPATH as man1.`,
		Example: `  convtag man /usr/local/share/man/man1
  convtag man /tmp/m && man -l /tmp/m/convtag-tag.1`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			dir := args[0]
			if err := os.MkdirAll(dir, 0o777); err != nil {
				return withCode(exitFailure, fmt.Errorf("man: %w", err))
			}
			hdr := &doc.GenManHeader{Title: "CONVTAG", Section: "1", Source: "convtag " + version, Manual: "convtag manual"}
			root := cmd.Root()
			root.DisableAutoGenTag = true
			if err := doc.GenManTree(root, hdr, dir); err != nil {
				return withCode(exitFailure, fmt.Errorf("man: %w", err))
			}
			n, _ := filepath.Glob(filepath.Join(dir, "convtag*.1"))
			fmt.Fprintf(a.stderr, "convtag: wrote %d manual pages to %s\n", len(n), dir)
			return nil
		},
	}
}
