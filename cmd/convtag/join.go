package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"slices"
	"strconv"
	"strings"
	"syscall"

	"github.com/spf13/cobra"

	"convtag/stream"
)

func init() { commands = append(commands, newJoinCmd) }

func newJoinCmd(a *app) *cobra.Command {
	var output string
	var missing bool
	cmd := &cobra.Command{
		Use:   "join [-o FILE] PART...",
		Short: "Join the parts written by tag --shard, in order, once every part is there and complete",
		Long: `join concatenates the parts that "tag --shard K/N -o PART" wrote, in the
order of K (not of the arguments, so a shell glob will do), to -o FILE
(written through a temporary file and renamed when complete) or to standard
output. Before writing anything it checks, from each PART's PART.stats.json:

  - every part 1..N is there, exactly once, and its stats file exists
    (a task that did not finish has none);
  - all parts are of one run: the same input name and size, the same N;
  - each PART still has the size its task wrote.

A problem is one line on standard error per part, and join exits 1 without
writing. --missing prints instead the parts that must be run again, as a
list for "sbatch --array" (e.g. 3,5-7; nothing when all are there), and
exits 0 unless the parts are of different runs. The parts are joined byte
for byte: compressed parts (-o part-K.jsonl.zst or .gz) join into one valid
compressed file.

` + exitHelp,
		Example: `  convtag join -o tagged.jsonl parts/part-*.jsonl
  sbatch --array=$(convtag join --missing parts/part-*.jsonl) --export=ALL,PARTS=8 by-part.sbatch`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			set, problems, err := readParts(args)
			if err != nil {
				return withCode(exitFailure, err)
			}
			for _, p := range problems {
				fmt.Fprintf(a.stderr, "convtag: join: %s\n", p)
			}
			if missing {
				if len(set.missing) > 0 {
					fmt.Fprintln(a.stdout, arrayList(set.missing))
				}
				return nil
			}
			if len(set.missing) > 0 {
				return withCode(exitFailure, fmt.Errorf("%d of %d parts of %s missing or incomplete: %s; run them again (convtag join --missing lists them for sbatch --array)",
					len(set.missing), set.n, set.input, arrayList(set.missing)))
			}
			// Caught, so that an interrupted join removes its temporary file.
			ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
			defer stop()
			err = joinParts(ctx, a, set.paths, set.bytes, output)
			var ee *exitError
			switch {
			case errors.As(err, &ee):
				return err
			case errors.Is(err, context.Canceled):
				err = errors.New("interrupted")
			}
			return withCode(exitFailure, err)
		},
	}
	f := cmd.Flags()
	f.StringVarP(&output, "output", "o", "", "write the joined parts to FILE (temporary file renamed when complete) instead of standard output")
	f.BoolVar(&missing, "missing", false, "print the parts to run again (e.g. 3,5-7, for sbatch --array) instead of joining")
	return cmd
}

// partSet is what readParts found: the parts' files in the order of K
// (empty where missing), their sizes from the stats files, and the K that
// must be run again.
type partSet struct {
	input   string
	n       int
	paths   []string
	bytes   []int64
	missing []int
}

// readParts reads every part's stats file and checks the parts against
// each other. Problems that running the part again fixes (no stats file, a
// changed size) are returned as messages and their K as missing; parts of
// different runs or two files claiming one part are an error.
func readParts(paths []string) (partSet, []string, error) {
	type part struct {
		path string
		st   shardStats
	}
	var parts []part
	var problems []string
	for _, p := range paths {
		fi, err := os.Stat(p)
		if err != nil {
			return partSet{}, nil, err
		}
		if fi.IsDir() {
			return partSet{}, nil, fmt.Errorf("%s: a directory, not a part file", p)
		}
		b, err := os.ReadFile(p + shardStatsSuffix)
		if errors.Is(err, os.ErrNotExist) {
			problems = append(problems, fmt.Sprintf("%s: no %s%s: its task did not finish", p, p, shardStatsSuffix))
			continue
		}
		if err != nil {
			return partSet{}, nil, err
		}
		var st shardStats
		if err := json.Unmarshal(b, &st); err != nil || st.Parts < 1 || st.Part < 1 || st.Part > st.Parts || st.Input == "" {
			if err == nil {
				err = errors.New("no part K of N with 1 <= K <= N, or no input")
			}
			return partSet{}, nil, fmt.Errorf("%s%s: not a stats file of tag --shard: %v", p, shardStatsSuffix, err)
		}
		if fi.Size() != st.Bytes {
			problems = append(problems, fmt.Sprintf("%s: %d bytes, but its task wrote %d: changed since (part %d)", p, fi.Size(), st.Bytes, st.Part))
			continue
		}
		parts = append(parts, part{p, st})
	}
	if len(parts) == 0 {
		return partSet{}, problems, fmt.Errorf("none of the %d files is a complete part of tag --shard", len(paths))
	}
	first := parts[0]
	set := partSet{input: first.st.Input, n: first.st.Parts, paths: make([]string, first.st.Parts), bytes: make([]int64, first.st.Parts)}
	for _, p := range parts[1:] {
		if p.st.Input != first.st.Input || p.st.InputBytes != first.st.InputBytes || p.st.Parts != first.st.Parts {
			return partSet{}, nil, fmt.Errorf("%s is part %d/%d of %s (%d bytes), but %s is part %d/%d of %s (%d bytes): parts of different runs",
				p.path, p.st.Part, p.st.Parts, p.st.Input, p.st.InputBytes, first.path, first.st.Part, first.st.Parts, first.st.Input, first.st.InputBytes)
		}
	}
	for _, p := range parts {
		k := p.st.Part - 1
		if set.paths[k] != "" {
			return partSet{}, nil, fmt.Errorf("%s and %s are both part %d/%d of %s", set.paths[k], p.path, p.st.Part, p.st.Parts, p.st.Input)
		}
		set.paths[k], set.bytes[k] = p.path, p.st.Bytes
	}
	for k, p := range set.paths {
		if p == "" {
			set.missing = append(set.missing, k+1)
		}
	}
	return set, problems, nil
}

// joinParts copies the parts in order to output ("" or "-": a.stdout),
// checking each still holds the bytes its task wrote.
func joinParts(ctx context.Context, a *app, paths []string, sizes []int64, output string) error {
	var w io.Writer = a.stdout
	var out *stream.OutputFile
	if output != "" && output != "-" {
		if fi, err := os.Stat(output); err == nil {
			for _, p := range paths {
				if pi, err := os.Stat(p); err == nil && os.SameFile(fi, pi) {
					return usageErr("convtag join -o joined.jsonl part-*.jsonl", "-o %s is one of the parts", output)
				}
			}
		}
		var err error
		if out, err = stream.CreateOutputFile(output); err != nil {
			return err
		}
		defer out.Discard() // after Commit it does nothing
		w = out
	}
	for i, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			return err
		}
		n, err := io.CopyBuffer(w, ctxReader{ctx, f}, make([]byte, 1<<20))
		f.Close()
		if err != nil {
			return fmt.Errorf("%s: %w", p, err)
		}
		if n != sizes[i] {
			return fmt.Errorf("%s: %d bytes, but its task wrote %d: changed while joining", p, n, sizes[i])
		}
	}
	if out != nil {
		return out.Commit()
	}
	return nil
}

// ctxReader reads r until ctx is done.
type ctxReader struct {
	ctx context.Context
	r   io.Reader
}

func (c ctxReader) Read(p []byte) (int, error) {
	if err := c.ctx.Err(); err != nil {
		return 0, err
	}
	return c.r.Read(p)
}

// arrayList writes ascending part numbers as sbatch --array takes them:
// 3,5-7.
func arrayList(ks []int) string {
	ks = slices.Clone(ks)
	slices.Sort(ks)
	var b strings.Builder
	for i := 0; i < len(ks); {
		j := i
		for j+1 < len(ks) && ks[j+1] == ks[j]+1 {
			j++
		}
		if b.Len() > 0 {
			b.WriteByte(',')
		}
		b.WriteString(strconv.Itoa(ks[i]))
		if j > i {
			b.WriteString("-" + strconv.Itoa(ks[j]))
		}
		i = j + 1
	}
	return b.String()
}
