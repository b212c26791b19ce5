package main

import (
	"strings"

	"github.com/spf13/cobra"
)

// fixedValues lists, per command and flag, the values shell completion
// offers. Every value here is one the command accepts; TestCompletion
// checks that against the commands themselves.
var fixedValues = map[string]map[string][]string{
	"tag": {
		"format":   {"auto", "jsonl", "text"},
		"emit":     {"tsv", "jsonl"},
		"compress": {"auto", "none", "gzip", "zstd"},
		"progress": {"auto", "on", "off"},
	},
	"train": {
		"format":               {"jsonl", "csv", "tsv", "label-tab-text"},
		"optimizer":            {"adadelta", "adam"},
		"class-weights":        {"none", "balanced"},
		"label-threshold-goal": {"f1", "precision:0.9"},
	},
	"eval": {
		"format":        {"jsonl", "csv", "tsv", "label-tab-text"},
		"optimizer":     {"adadelta", "adam"},
		"class-weights": {"none", "balanced"},
	},
}

// registerCompletions adds completion of flag values to the commands:
// the fixed lists above, and for tag's --keep and --drop the tags of the
// model named by -m (the built-in model's without it).
func registerCompletions(a *app, root *cobra.Command) {
	for _, c := range root.Commands() {
		for flag, values := range fixedValues[c.Name()] {
			if c.Flags().Lookup(flag) == nil {
				continue
			}
			vs := values
			_ = c.RegisterFlagCompletionFunc(flag, func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
				return vs, cobra.ShellCompDirectiveNoFileComp
			})
		}
		if c.Name() != "tag" {
			continue
		}
		labels := func(cmd *cobra.Command, _ []string, typed string) ([]string, cobra.ShellCompDirective) {
			path, _ := cmd.Flags().GetString("model")
			m, err := a.loadModel(path)
			if err != nil {
				return nil, cobra.ShellCompDirectiveNoFileComp
			}
			defer m.Close()
			unsure, _ := cmd.Flags().GetString("unsure-tag")
			// --keep a,b: complete the part after the last comma.
			done := ""
			if i := strings.LastIndexByte(typed, ','); i >= 0 {
				done = typed[:i+1]
			}
			var out []string
			for _, l := range append(append([]string(nil), m.Labels...), unsure) {
				out = append(out, done+l)
			}
			return out, cobra.ShellCompDirectiveNoFileComp | cobra.ShellCompDirectiveNoSpace
		}
		for _, flag := range []string{"keep", "drop"} {
			_ = c.RegisterFlagCompletionFunc(flag, labels)
		}
	}
}
