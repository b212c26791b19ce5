package main

import "github.com/spf13/cobra"

// Commands that later work builds. Each says so and exits non-zero.
func init() {
	for _, c := range []struct{ name, short string }{} {
		commands = append(commands, func(*app) *cobra.Command {
			return &cobra.Command{Use: c.name, Short: c.short + " (not yet built)", RunE: notYet(c.name)}
		})
	}
}
