package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"convtag/model/builtin"
)

func init() { commands = append(commands, newInspectCmd) }

func newInspectCmd(a *app) *cobra.Command {
	var asJSON, verify bool
	c := &cobra.Command{
		Use:   "inspect [MODEL]",
		Short: "Show what a model file holds",
		Long: `inspect prints what a model file holds: labels, vocabulary size, buckets,
embedding size, window widths, filters, whether the folded table is present,
file size, format version, every metadata field and the training summary.
With no MODEL it describes the built-in model.

--verify recomputes the checksum of the tensor data and exits with status 2
when it does not match the one stored in the file.`,
		Example: `  convtag inspect testdata/fixture.safetensors
  convtag inspect --json my-tagger.safetensors | jq .labels
  convtag inspect --verify my-tagger.safetensors`,
		Args: cobra.MaximumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			path := ""
			if len(args) == 1 {
				path = args[0]
			}
			m, err := a.loadModel(path)
			if err != nil {
				return err
			}
			defer m.Close()
			in := m.Info()
			in.File = path
			if path == "" {
				in.File = builtin.Name
			}
			if verify {
				if err := m.Verify(); err != nil {
					return withCode(exitUsage, fmt.Errorf("%s: %w", in.File, err))
				}
			}
			if asJSON {
				enc := json.NewEncoder(a.stdout)
				enc.SetIndent("", "  ")
				return enc.Encode(in)
			}
			if err := in.WriteText(a.stdout); err != nil {
				return err
			}
			if verify {
				fmt.Fprintln(a.stdout, "verified:       checksum matches")
			}
			return nil
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print the description as JSON")
	c.Flags().BoolVar(&verify, "verify", false, "recompute the data checksum; exit 2 on mismatch")
	return c
}
