package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"convtag/model"
	"convtag/model/builtin"
)

func init() { commands = append(commands, newInspectCmd) }

// builtinCaution is what inspect says first about the built-in model.
const builtinCaution = `caution:        a demonstration (positive/negative sentiment of product, film and
                restaurant reviews); not fit for moderation or any decision about a person`

func newInspectCmd(a *app) *cobra.Command {
	var asJSON, verify, all bool
	var sf sampleFlags
	c := &cobra.Command{
		Use:   "inspect [MODEL]",
		Short: "Show what a model file holds",
		Long: `inspect prints what a model file holds: labels, vocabulary size, rows for unseen words,
embedding size, window widths, filters, whether the folded table is present,
file size, format version, every metadata field and the training summary.
With no MODEL it describes the built-in model.

--verify reads the whole file and exits with status 2 when tag or eval could
not use it: the checksum of the tensor data differs from the stored one, a
weight is NaN or infinite, the vocabulary index misses a word, the forward
pass on a few probe texts gives no probabilities (weights that overflow), or
the stored baseline does not decode.

--ngrams N --sample FILE runs the texts of FILE (plain lines, or JSON Lines
with --text-key) through the network and shows, for each label, the N word
windows that most raise its score, and for each filter its N strongest
windows.`,
		Example: `  convtag inspect testdata/fixture.safetensors
  convtag inspect --json my-tagger.safetensors | jq .labels
  convtag inspect --verify my-tagger.safetensors
  convtag inspect my-tagger.safetensors --ngrams 10 --sample chat.jsonl --text-key text`,
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
			if err := sf.check(); err != nil {
				return err
			}
			in := m.Info()
			in.File = path
			if path == "" {
				in.File = builtin.Name
			}
			if verify {
				if err := m.Verify(); err != nil {
					return withCode(exitUsage, err) // the error names the file
				}
			}
			var sample *sampleReport
			if sf.ngrams > 0 {
				if sample, err = sf.survey(a, m); err != nil {
					return err
				}
			}
			if asJSON {
				enc := json.NewEncoder(a.stdout)
				enc.SetIndent("", "  ")
				if sample != nil {
					return enc.Encode(struct {
						model.Info
						Sample *sampleReport `json:"sample"`
					}{in, sample})
				}
				return enc.Encode(in)
			}
			if path == "" {
				fmt.Fprintln(a.stdout, builtinCaution)
			}
			if err := writeInfoText(a.stdout, &in, all); err != nil {
				return err
			}
			if verify {
				fmt.Fprintln(a.stdout, "verified:       checksum, weights, index, probe predictions and baseline")
			}
			if sample != nil {
				return sample.writeText(a.stdout)
			}
			return nil
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print the description as JSON")
	c.Flags().BoolVar(&all, "all", false, "also print every metadata field and the training summary's raw fields")
	c.Flags().BoolVar(&verify, "verify", false, "check the checksum, weights, index, a forward pass and the baseline; exit 2 on a problem")
	c.Flags().IntVar(&sf.ngrams, "ngrams", 0, "show the N windows of --sample that most raise each label's score, and each filter's N strongest")
	c.Flags().StringArrayVar(&sf.samples, "sample", nil, "texts for --ngrams (plain lines, or JSON Lines with --text-key); repeatable")
	c.Flags().StringArrayVar(&sf.textKeys, "text-key", nil, "dotted path of the text in a JSON sample record; repeat to join several")
	return c
}
