package main

import (
	"context"
	"fmt"
	"os"

	"convtag/stream"

	"github.com/spf13/pflag"
)

// confirmFlags are tag's flags for rsyslog's omprog confirmation protocol
// (stream.Confirm).
type confirmFlags struct {
	on, fsync         bool
	beginMark, commit string
}

func (c *confirmFlags) flags(f *pflag.FlagSet) {
	f.BoolVar(&c.on, "confirm", false, "answer on stdout as rsyslog's omprog expects with confirmMessages=\"on\" (and useTransactions): OK once ready, then per message or transaction once its records are written to -o FILE; needs --append -o FILE, reads stdin only")
	f.BoolVar(&c.fsync, "fsync", false, "with --confirm: sync -o FILE (and --rejects FILE) to disk before each confirmation")
	f.StringVar(&c.beginMark, "begin-mark", stream.DefaultBeginMark, "with --confirm: the line that opens a transaction (omprog's beginTransactionMark)")
	f.StringVar(&c.commit, "commit-mark", stream.DefaultCommitMark, "with --confirm: the line that commits a transaction (omprog's commitTransactionMark)")
}

// check refuses what --confirm cannot do, and the confirm-only flags
// without it.
func (c *confirmFlags) check(o *stream.Options, args []string, output, progress string, shard bool) error {
	const try = `convtag tag --confirm --append -o tagged.jsonl -k msg   (as omprog's binary, confirmMessages="on")`
	if !c.on {
		if c.fsync {
			return usageErr(try, "--fsync is for --confirm: it syncs the output before each confirmation")
		}
		return nil
	}
	switch {
	case output == "" || output == "-":
		return usageErr(try, "--confirm needs -o FILE: standard output carries the protocol's replies")
	case !o.Append:
		return usageErr(try, "--confirm needs --append: without it FILE would appear only at the end of the run, and confirmed records would not be in it")
	case len(args) > 0:
		return usageErr(try, "--confirm reads the messages on standard input, not from files")
	case shard:
		return usageErr(try, "--confirm with --shard: a part is of a file, the protocol is on standard input")
	case o.Format == stream.InputCSV || o.Format == stream.InputTSV:
		return usageErr(try, "--confirm takes one message per line (JSON Lines or text), not CSV or TSV")
	case o.Compress == stream.CompressGzip || o.Compress == stream.CompressZstd ||
		o.Compress == stream.CompressAuto && (hasSuffix(output, ".gz") || hasSuffix(output, ".zst")):
		return usageErr(try, "--confirm writes an uncompressed FILE: a compressed one cut by a kill could not be repaired")
	case progress == "on":
		return usageErr(try, "--confirm with --progress on: there is no input size to show progress against")
	case c.beginMark == "" || c.commit == "" || c.beginMark == c.commit:
		return usageErr(try, "--begin-mark and --commit-mark must be two different, non-empty lines")
	}
	return nil
}

func hasSuffix(s, suf string) bool { return len(s) >= len(suf) && s[len(s)-len(suf):] == suf }

// openRejects opens FILE for --rejects under --confirm: appended to in
// place, since a rejected record is confirmed once it is written there.
func (c *confirmFlags) openRejects(path string) (*os.File, error) {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o666)
	if err != nil {
		return nil, fmt.Errorf("--rejects: %w", err)
	}
	return f, nil
}

// run speaks the protocol on a's standard input and output.
func (c *confirmFlags) run(ctx context.Context, a *app, o stream.Options) (stream.Stats, error) {
	co := stream.ConfirmOptions{BeginMark: c.beginMark, CommitMark: c.commit, Fsync: c.fsync,
		Note: func(msg string) { fmt.Fprintf(a.stderr, "convtag: %s\n", msg) }}
	return stream.Confirm(ctx, o, co, a.stdin, a.stdout)
}
