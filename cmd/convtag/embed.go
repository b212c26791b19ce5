package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"strings"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/spf13/cobra"

	"convtag/model/sgns"
	"convtag/model/token"
	"convtag/model/vectors"
	"convtag/stream"
)

func init() { commands = append(commands, newEmbedCmd) }

// embedFlags are the embed command's settings.
type embedFlags struct {
	output, input     string
	similar, textKeys []string
	binary, quiet     bool
	top               int
	o                 sgns.Options
	sample            float64
}

func newEmbedCmd(a *app) *cobra.Command {
	var f embedFlags
	c := &cobra.Command{
		Use:   "embed -o VECTORS [flags] [FILE...]\n  convtag embed --similar-to WORD --from VECTORS",
		Short: "Learn word vectors from unlabelled text",
		Long: `embed learns word vectors from unlabelled text by skip-gram with negative
sampling (Mikolov et al., 2013), for "convtag train --vectors".

Each line of the FILEs (plain, gzip, zstd or bzip2; "-" or none for
standard input) is one record: plain text, or with --text-key a JSON record
whose text is under that dotted path (repeat to join several values with a
space). Words are the model's tokens, so the vectors' words are the ones a
model looks up. The input is read once to count words and once per epoch:
memory holds the vocabulary and the vectors, never the text (standard input
is copied to a temporary file first).

Vectors are written in the common word-vector text format ("count dim",
then "word v1 ... vd" lines), or with --binary the binary variant.

With --similar-to, embed instead lists the words whose vectors point the
most the same way as WORD's (cosine similarity) in the vectors file given
by --from: one line per word found, "WORD<TAB>rank<TAB>word<TAB>cosine".

The defaults are the published ones for skip-gram with negative sampling
and sub-sampling of frequent words: --vector-size 100, --context 5,
--noise-words 5, --min-seen 5, --passes 5, --thin-above 1e-4.

With -j 1 a --seed gives identical vectors; with more jobs the vectors are
updated without locks and vary from run to run.

The -o file is checked before any text is read (not a directory, not an
input file, its directory writable) and written through a temporary file
renamed into place. Signals: SIGINT and SIGTERM stop, write nothing and
exit with status 1.

` + exitHelp,
		Example: `  convtag embed -o chat.wordvec.txt chat-2026-*.log.gz
  convtag embed -o chat.wordvec.txt --text-key text --vector-size 128 chat.jsonl
  convtag train -o ferry.safetensors --vectors chat.wordvec.txt testdata/demo/train.jsonl
  convtag embed --similar-to ferry --similar-to delayed --from chat.wordvec.txt`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			if len(f.similar) > 0 {
				return runSimilar(a, &f, args)
			}
			return runEmbed(a, &f, args)
		},
	}
	fl := c.Flags()
	fl.StringVarP(&f.output, "output", "o", "", `vectors file to write ("-" for standard output)`)
	fl.BoolVar(&f.binary, "binary", false, "write the binary word-vector format instead of text")
	fl.StringArrayVar(&f.textKeys, "text-key", nil, "dotted path of the text in a JSON record; repeat to join several (default: plain lines)")
	fl.IntVar(&f.o.Dim, "vector-size", sgns.DefaultDim, "numbers per word vector")
	fl.IntVar(&f.o.Window, "context", sgns.DefaultWindow, "how many words on each side a word learns from at most (each word draws a reach of 1..N)")
	fl.IntVar(&f.o.Negative, "noise-words", sgns.DefaultNegative, "random words contrasted with each context word (negative sampling)")
	fl.IntVar(&f.o.MinCount, "min-seen", sgns.DefaultMinCount, "leave out words seen fewer times")
	fl.Float64Var(&f.sample, "thin-above", sgns.DefaultSample, "share of the tokens above which a word is thinned out (sub-sampling; 1e-3 keeps more of a small input); 0 keeps every token")
	fl.Float64Var(&f.o.Alpha, "learning-rate", sgns.DefaultAlpha, "starting learning rate, decayed linearly to nothing")
	fl.IntVar(&f.o.Epochs, "passes", sgns.DefaultEpochs, "passes over the input")
	fl.Uint64Var(&f.o.Seed, "seed", 1, "seed for initialisation, sampling and windows")
	fl.IntVarP(&f.o.Jobs, "jobs", "j", 0, "worker threads (default: all cores); only -j 1 is reproducible")
	fl.BoolVarP(&f.quiet, "quiet", "q", false, "no progress on stderr")
	fl.StringArrayVar(&f.similar, "similar-to", nil, "list the words most similar to WORD in the --from vectors (repeatable)")
	fl.StringVar(&f.input, "from", "", "vectors file for --similar-to")
	fl.IntVar(&f.top, "count", 10, "words to list for each --similar-to word")
	return c
}

func (f *embedFlags) check(args []string) error {
	o := f.o
	switch {
	case f.output == "":
		return usageErr("convtag embed -o VECTORS FILE...", "embed: no output file (-o)")
	case f.input != "":
		return usageErr("convtag embed --similar-to WORD --from VECTORS", "embed: --from is for --similar-to")
	case o.Dim < 1 || o.Dim > vectors.MaxDim:
		return usageErr("--vector-size 100", "embed: --vector-size %d out of range 1..%d", o.Dim, vectors.MaxDim)
	case o.Window < 1 || o.Negative < 1 || o.MinCount < 1 || o.Epochs < 1:
		return usageErr("convtag embed --help", "embed: %s must be at least 1", firstBelowOne(
			"--context", o.Window, "--noise-words", o.Negative, "--min-seen", o.MinCount, "--passes", o.Epochs))
	case o.Jobs < 0:
		return usageErr("-j 2", "embed: --jobs %d is negative", o.Jobs)
	case !(o.Alpha > 0 && o.Alpha < 10):
		return usageErr("--learning-rate 0.025", "embed: --learning-rate %g out of range (0, 10)", o.Alpha)
	case !(f.sample >= 0 && f.sample < 1):
		return usageErr("--thin-above 1e-4", "embed: --thin-above %g out of range [0, 1)", f.sample)
	}
	return nil
}

// textCorpus streams the texts of files for each pass of training and
// keeps the first pass's record counts.
type textCorpus struct {
	files []string
	opt   stream.TextOptions
	stats *stream.TextStats
}

func (c *textCorpus) Scan(fn func([]byte) error) error {
	st, err := stream.ScanTexts(c.files, c.opt, fn)
	if c.stats == nil && err == nil {
		c.stats = &st
	}
	return err
}

func runEmbed(a *app, f *embedFlags, args []string) error {
	if err := f.check(args); err != nil {
		return err
	}
	if f.output != "-" {
		if err := checkOutput("embed", f.output, args...); err != nil {
			return err
		}
	}
	ctx, stop := notifyInterrupt()
	defer stop()
	if len(args) == 0 {
		args = []string{"-"}
	}
	// Standard input can be read only once; the passes need it again.
	for i, name := range args {
		if name != "-" {
			continue
		}
		tmp, err := spool(ctx, a.stdin)
		if errors.Is(err, errInterrupted) {
			return withCode(exitFailure, err)
		}
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("embed: copy standard input: %w", err))
		}
		defer os.Remove(tmp)
		for j := i; j < len(args); j++ {
			if args[j] == "-" {
				args[j] = tmp
			}
		}
		break
	}
	f.o.Sample = f.sample
	if f.sample == 0 {
		f.o.Sample = -1
	}
	f.o.Tokenizer = token.Settings{}
	if !f.quiet {
		f.o.Progress, f.o.ProgressEvery = embedProgress(a)
	}
	corpus := &textCorpus{files: args, opt: stream.TextOptions{TextKeys: f.textKeys, Report: -1}}

	res, err := sgns.Train(ctx, corpus, f.o)
	if corpus.stats != nil {
		reportTexts(a, f, args, corpus)
	}
	switch {
	case errors.Is(err, context.Canceled):
		return withCode(exitFailure, errInterrupted)
	case errors.Is(err, sgns.ErrNoVocabulary):
		return withCode(exitFailure, fmt.Errorf("embed: %s: %w", strings.Join(args, ", "), err))
	case err != nil:
		var ie *stream.InputError
		if errors.As(err, &ie) {
			return withCode(exitFailure, err)
		}
		return withCode(exitFailure, fmt.Errorf("embed: %w", err))
	}
	format := vectors.Text
	if f.binary {
		format = vectors.Binary
	}
	if ctx.Err() != nil { // once writing has begun, it is finished
		return withCode(exitFailure, errInterrupted)
	}
	if err := writeVectors(a, f.output, res.Vectors, format); err != nil {
		return withCode(exitFailure, fmt.Errorf("embed: %w", err))
	}
	if !f.quiet {
		jobs := f.o.Jobs
		if jobs == 0 {
			jobs = runtime.GOMAXPROCS(0)
		}
		fmt.Fprintf(a.stderr, "convtag: embed: %d words of dimension %d from %d records (%d tokens; %d distinct words below --min-seen %d); %d passes on %d jobs in %s, %s tokens/s; wrote %s\n",
			res.Vectors.Len(), res.Vectors.Dim, res.Records, res.Tokens, res.Rare, f.o.MinCount,
			f.o.Epochs, jobs, res.TrainTime.Round(time.Millisecond), siCount(float64(res.Words)*float64(f.o.Epochs)/res.TrainTime.Seconds()), f.output)
	}
	return nil
}

// reportTexts says how many JSON records had no usable text, with the
// first few by file and line (from a separate, short pass).
func reportTexts(a *app, f *embedFlags, args []string, c *textCorpus) {
	st := c.stats
	if st.Skipped == 0 {
		return
	}
	fmt.Fprintf(a.stderr, "convtag: embed: %d records skipped (malformed JSON or no text under --text-key)\n", st.Skipped)
	opt := c.opt
	opt.Report = 5
	shown, _ := stream.ScanTexts(args, opt, func([]byte) error { return nil })
	for _, p := range shown.Problems {
		fmt.Fprintf(a.stderr, "convtag: %v\n", p)
	}
}

// spool copies r to a temporary file and returns its name. When ctx ends
// first it removes the file and returns errInterrupted (the copy goes on
// into the unlinked file until the process ends).
func spool(ctx context.Context, r io.Reader) (string, error) {
	tmp, err := os.CreateTemp("", "convtag-embed-*")
	if err != nil {
		return "", err
	}
	_, err = untilDone(ctx, func() (int64, error) { return io.Copy(tmp, r) })
	if errors.Is(err, errInterrupted) {
		os.Remove(tmp.Name())
		return "", errInterrupted
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		os.Remove(tmp.Name())
		return "", err
	}
	return tmp.Name(), nil
}

// writeVectors writes s to path ("-" is standard output) through a
// temporary file beside it, renamed into place once complete.
func writeVectors(a *app, path string, s *vectors.Set, format vectors.Format) (err error) {
	if path == "-" {
		return s.Write(a.stdout, format)
	}
	out, err := stream.CreateOutputFile(path)
	if err != nil {
		return err
	}
	if err := s.Write(out, format); err != nil {
		out.Discard()
		return err
	}
	return out.Commit()
}

// embedProgress returns the progress reporter: a line rewritten in place
// every second on a terminal, else a line every 10 seconds, and one line at
// the end of each phase.
func embedProgress(a *app) (func(sgns.Progress), time.Duration) {
	f, ok := a.stderr.(*os.File)
	tty := ok && isatty.IsTerminal(f.Fd())
	every := 10 * time.Second
	if tty {
		every = time.Second
	}
	return func(p sgns.Progress) {
		var line string
		if p.Phase == sgns.PhaseCount {
			line = fmt.Sprintf("counting · %s tokens · %s tokens/s", siCount(float64(p.Words)), siCount(p.WordsPerSecond()))
		} else {
			line = fmt.Sprintf("pass %d/%d · %.0f%% · %s tokens/s · rate %.4f", p.Epoch, p.Epochs,
				100*float64(p.Words)/float64(max(p.Total, 1)), siCount(p.WordsPerSecond()), p.Alpha)
			if p.Done {
				line += fmt.Sprintf(" · took %s", p.Elapsed.Round(100*time.Millisecond))
			} else {
				line += fmt.Sprintf(" · about %s left", p.Remaining().Round(time.Second))
			}
		}
		switch {
		case tty && p.Done:
			fmt.Fprintf(a.stderr, "\r\033[Kconvtag: %s\n", line)
		case tty:
			fmt.Fprintf(a.stderr, "\r\033[Kconvtag: %s", line)
		default:
			fmt.Fprintf(a.stderr, "convtag: %s\n", line)
		}
	}, every
}

// firstBelowOne names the first of the (flag, value) pairs whose value is
// below 1.
func firstBelowOne(pairs ...any) string {
	for i := 0; i+1 < len(pairs); i += 2 {
		if pairs[i+1].(int) < 1 {
			return fmt.Sprintf("%s (%d)", pairs[i], pairs[i+1])
		}
	}
	return ""
}

// siCount spells n with a k or M suffix.
func siCount(n float64) string {
	switch {
	case n >= 1e6:
		return fmt.Sprintf("%.2fM", n/1e6)
	case n >= 1e4:
		return fmt.Sprintf("%.0fk", n/1e3)
	}
	return fmt.Sprintf("%.0f", n)
}

func runSimilar(a *app, f *embedFlags, args []string) error {
	switch {
	case f.input == "":
		return usageErr("convtag embed --similar-to WORD --from VECTORS", "embed: --similar-to needs the vectors file (--from)")
	case f.output != "" || len(args) > 0:
		return usageErr("convtag embed --similar-to WORD --from VECTORS", "embed: --similar-to reads vectors and takes no -o or input files")
	case f.top < 1:
		return usageErr("--count 10", "embed: --count %d is below 1", f.top)
	}
	r, err := stream.Open(f.input, nil)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("embed: %w", err))
	}
	s, err := vectors.Read(r)
	r.Close()
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("embed: %s: %w", f.input, err))
	}
	tok := token.New(token.Settings{})
	var ts token.Tokens
	idx := s.Index()
	var out strings.Builder
	for _, w := range f.similar {
		q, ok := idx[w]
		if !ok {
			// Look the word up as the tokenizer spells it ("Ferry" → "ferry").
			tok.Tokenize(&ts, []byte(w))
			if ts.Len() == 1 {
				q, ok = idx[string(ts.At(0))]
			}
		}
		if !ok {
			return withCode(exitFailure, fmt.Errorf("embed: %q is not in %s (%d words)", w, f.input, s.Len()))
		}
		for i, n := range s.NearestTo(s.Vec(q), f.top, q) {
			fmt.Fprintf(&out, "%s\t%d\t%s\t%.4f\n", s.Words[q], i+1, n.Word, n.Similarity)
		}
	}
	_, err = io.WriteString(a.stdout, out.String())
	return withCode(exitFailure, err)
}
