package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"slices"
	"sort"
	"strings"
	"syscall"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"

	"convtag/model"
	"convtag/stream"
)

func init() { commands = append(commands, newTagCmd) }

// newTagger adapts m to the pipeline: with why > 0 its scorers also
// explain each tag (see whyTagger), otherwise they do no such work.
func newTagger(m *model.Model, why int) stream.Tagger {
	if why > 0 {
		return whyTagger{m: m, n: why}
	}
	return modelTagger{m}
}

// modelTagger adapts a *model.Model to stream.Tagger.
type modelTagger struct{ m *model.Model }

func (t modelTagger) Labels() []string { return t.m.Labels }

func (t modelTagger) NewScorer() stream.Scorer { return predictorScorer{t.m.NewPredictor()} }

type predictorScorer struct{ p *model.Predictor }

func (s predictorScorer) Score(text []byte) []float32 { return s.p.Predict(text) }

// Words tells the pipeline that a text without a token gets the unsure tag
// (stream.WordCounter).
func (s predictorScorer) Words() int { return s.p.TokenCount() }

// maxShownProblems caps the record problems printed on stderr; --stats
// has the counts of all of them.
const maxShownProblems = 20

func newTagCmd(a *app) *cobra.Command {
	var (
		modelPath, format, emit, output, compress, rejects, progress string
		textKeys, keep, drop                                         []string
		o                                                            stream.Options
		strict, showStats                                            bool
		why                                                          int
	)
	c := &cobra.Command{
		Use:   "tag [flags] [FILE...]",
		Short: "Tag every record of a stream, in order (the default command)",
		Long: `tag reads records from the FILEs one after another as one stream (standard
input when there is none, or for "-"), plain or compressed with gzip, zstd or
bzip2 (recognised from the bytes), and writes each record with a tag and a
confidence, in input order.

A JSON record keeps its bytes: the tag and confidence keys are spliced in
before its closing brace (an existing key of the same name gets the new
value in place). A text line is written as tag, TAB, confidence, TAB, the
line; or, with --emit jsonl, as {"text": line, "tag": ..., "confidence": ...}.
A CR before the newline stays in the record and is not part of the text.
Under --format auto a line starting with '{' is JSON; one that does not parse
and does not begin like an object ('{' then a quoted key or '}'), such as
"{sigh} my card was declined", is a text line. A text in which the model
finds no word (empty, punctuation only) gets the --unsure-tag, confidence 0.
A text key holding an array of byte values (0 to 255), as journalctl -o json
writes a message that is not valid UTF-8, is tagged on those bytes; a record
starting with the record separator 0x1E (journalctl -o json-seq) is JSON, and
the separator is kept.

Every record read gives one record written, unless --keep or --drop leaves
it out. Records that cannot be tagged pass through unchanged and are counted
(or go to the --rejects file): malformed JSON, a text key holding a number,
boolean, array or object, a line longer than 64 MiB. Empty and blank lines
and JSON records without the text key pass through unchanged; when none of
the first 1,000 JSON records has the key, one warning names the keys they
have. With --keep, untagged records are left out too.

Signals: SIGINT and SIGTERM stop after writing whole lines, exit status 1.
SIGHUP reopens the model file between two blocks (a bad file is reported and
the old model kept) and reopens the --output file for appending.

` + exitHelp,
		Example: `  convtag tag chat.jsonl > tagged.jsonl
  zstd -dc archive.jsonl.zst | convtag tag -m ferry.safetensors --keep weather
  convtag tag --format text --emit jsonl notes.txt
  tail -F service.log | convtag tag -k msg --min-confidence 0.6 -o tagged.jsonl.gz`,
		RunE: func(cmd *cobra.Command, args []string) error {
			var err error
			if o.Format, err = stream.ParseFormat(format); err != nil {
				return usageErr("convtag tag --format auto|jsonl|text", "--format: %v", err)
			}
			if o.Emit, err = stream.ParseEmit(emit); err != nil {
				return usageErr("convtag tag --emit tsv|jsonl", "--emit: %v", err)
			}
			if o.Compress, err = stream.ParseCompress(compress); err != nil {
				return usageErr("convtag tag --compress auto|none|gzip|zstd", "--compress: %v", err)
			}
			if o.MinConfidence < 0 || o.MinConfidence > 1 {
				return usageErr("convtag tag --min-confidence 0.7", "--min-confidence %v: want a probability from 0 to 1", o.MinConfidence)
			}
			if why < 0 || o.Top < 0 || o.Jobs < 0 || o.BlockSize < 0 {
				return usageErr("convtag tag --help", "--top, --jobs and --batch must not be negative")
			}
			switch progress {
			case "auto", "on", "off":
			default:
				return usageErr("convtag tag --progress auto|on|off", "--progress: unknown value %q", progress)
			}
			o.TextKeys = textKeys
			o.Keep, o.Drop = splitTags(keep), splitTags(drop)
			o.Output = output

			m, err := a.loadModel(modelPath)
			if err != nil {
				return err
			}
			tags := append(slices.Clone(m.Labels), o.UnsureTag)
			for _, t := range append(slices.Clone(o.Keep), o.Drop...) {
				if !slices.Contains(tags, t) {
					return usageErr("convtag inspect "+modelPath, "no tag %q in the model (its tags: %s)", t, strings.Join(tags, ", "))
				}
			}
			o.Tagger = newTagger(m, why)
			o.Why = why > 0

			if rejects != "" {
				f, err := os.Create(rejects)
				if err != nil {
					return withCode(exitFailure, fmt.Errorf("--rejects: %w", err))
				}
				defer f.Close()
				o.Rejects = f
			}

			shown, problems := 0, 0
			var laterInputErrs []error
			o.OnError = func(err error) {
				var ie *stream.InputError
				if errors.As(err, &ie) {
					laterInputErrs = append(laterInputErrs, err)
					return
				}
				problems++
				if shown < maxShownProblems {
					shown++
					fmt.Fprintf(a.stderr, "convtag: %v\n", err)
				} else if shown == maxShownProblems {
					shown++
					fmt.Fprintf(a.stderr, "convtag: more record problems are not shown; --stats counts them\n")
				}
			}

			o.Warn = func(msg string) { fmt.Fprintf(a.stderr, "convtag: %s\n", msg) }
			ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
			defer stop()
			go func() { <-ctx.Done(); stop() }() // a second signal kills at once
			o.Switch = new(stream.Switch)
			hup := make(chan os.Signal, 1)
			signal.Notify(hup, syscall.SIGHUP)
			defer signal.Stop(hup)
			hupDone := make(chan struct{})
			defer close(hupDone)
			go reloadOnHangup(a, modelPath, why, o.Switch, hup, hupDone)

			if bar := newProgress(a, progress, args); bar != nil {
				var last time.Time
				start := time.Now()
				o.Progress = func(read, records int64) {
					if now := time.Now(); now.Sub(last) >= 200*time.Millisecond {
						last = now
						bar.Describe(fmt.Sprintf("%.0f records/s", float64(records)/now.Sub(start).Seconds()))
						bar.Set64(read)
					}
				}
				defer bar.Finish()
			}

			st, err := stream.Run(ctx, o, args, a.stdin, a.stdout)
			if showStats {
				writeStats(a.stderr, st)
			}
			for _, e := range laterInputErrs[min(1, len(laterInputErrs)):] {
				fmt.Fprintf(a.stderr, "convtag: %v\n", e)
			}
			switch {
			case errors.Is(err, stream.ErrOutputClosed):
				return nil // the reader went away: end quietly, as filters do
			case errors.Is(err, context.Canceled):
				return withCode(exitFailure, errors.New("interrupted"))
			case err != nil:
				return withCode(exitFailure, err)
			case strict && st.Rejected > 0:
				return withCode(exitRejected, fmt.Errorf("%d records rejected (--strict)", st.Rejected))
			}
			return nil
		},
	}
	f := c.Flags()
	f.StringVarP(&modelPath, "model", "m", "", "model file (default: the built-in model)")
	f.StringVar(&format, "format", "auto", "input kind: auto (a line starting with '{' is JSON), jsonl or text")
	f.StringArrayVarP(&textKeys, "text-key", "k", nil, "dotted path of the text in a JSON record; repeat to join several with a space (default text)")
	f.StringVar(&o.TagKey, "tag-key", "tag", "key of the added tag")
	f.StringVar(&o.ConfidenceKey, "confidence-key", "confidence", "key of the added confidence (rounded to 4 decimals)")
	f.BoolVar(&o.Scores, "scores", false, `add every label's probability as an object under "scores" (JSON output)`)
	f.IntVar(&o.Top, "top", 0, `add the N best labels, best first, as an array under "top" (JSON output)`)
	f.IntVar(&why, "why", 0, `add the N word windows that weighed most for the tag, as an array under "why" (JSON output)`)
	f.Float64Var(&o.MinConfidence, "min-confidence", 0, "below this probability the record gets the --unsure-tag")
	f.StringVar(&o.UnsureTag, "unsure-tag", "unsure", "tag for records below --min-confidence and texts without a word")
	f.StringSliceVar(&keep, "keep", nil, "write only records with one of these tags (TAG[,TAG])")
	f.StringSliceVar(&drop, "drop", nil, "leave out records with one of these tags (TAG[,TAG])")
	f.StringVar(&emit, "emit", "tsv", "how text lines are written: tsv (tag TAB confidence TAB line) or jsonl")
	f.StringVarP(&output, "output", "o", "", "write to FILE (compressed by its suffix .gz or .zst)")
	f.BoolVar(&o.Append, "append", false, "with --output: add to FILE instead of replacing it (for a filter a log daemon restarts)")
	f.StringVar(&compress, "compress", "auto", "output compression: auto (by --output suffix), none, gzip or zstd")
	f.IntVarP(&o.Jobs, "jobs", "j", 0, "workers (default: all cores)")
	f.IntVar(&o.BlockSize, "batch", 0, "bytes of input a worker takes at a time (default 1048576)")
	f.StringVar(&rejects, "rejects", "", "write records that cannot be tagged to FILE instead of the output")
	f.BoolVar(&strict, "strict", false, "exit with status 3 at the end if any record was rejected")
	f.StringVar(&progress, "progress", "auto", "progress bar on stderr: auto (when stderr is a terminal and the input size is known), on or off")
	f.BoolVar(&showStats, "stats", false, "print a closing summary on stderr")
	return c
}

func splitTags(list []string) []string {
	var out []string
	for _, s := range list {
		if s = strings.TrimSpace(s); s != "" {
			out = append(out, s)
		}
	}
	return out
}

// reloadOnHangup reopens the model file on each SIGHUP and hands it to the
// running pipeline; a file that does not load is reported and the current
// model kept. Either way the output file is reopened.
func reloadOnHangup(a *app, path string, why int, sw *stream.Switch, hup <-chan os.Signal, done <-chan struct{}) {
	for {
		select {
		case <-done:
			return
		case <-hup:
		}
		m, err := a.loadModel(path)
		name := path
		if name == "" {
			name = "the built-in model"
		}
		if err != nil {
			fmt.Fprintf(a.stderr, "convtag: reload %s: %v; keeping the current model\n", name, err)
			sw.Set(nil)
			continue
		}
		sw.Set(newTagger(m, why))
		fmt.Fprintf(a.stderr, "convtag: reloaded %s\n", name)
	}
}

// newProgress returns a progress bar on stderr, or nil when there should be
// none: --progress off, or auto with stderr not a terminal or the input
// size unknown.
func newProgress(a *app, mode string, inputs []string) *progressbar.ProgressBar {
	if mode == "off" {
		return nil
	}
	total := int64(0)
	if len(inputs) == 0 {
		inputs = []string{"-"}
	}
	for _, name := range inputs {
		var st os.FileInfo
		var err error
		if name == "-" {
			f, ok := a.stdin.(*os.File)
			if !ok {
				total = -1
				break
			}
			st, err = f.Stat()
		} else {
			st, err = os.Stat(name)
		}
		if err != nil || !st.Mode().IsRegular() {
			total = -1
			break
		}
		total += st.Size()
	}
	if mode == "auto" {
		f, ok := a.stderr.(*os.File)
		if total < 0 || !ok || !isatty.IsTerminal(f.Fd()) {
			return nil
		}
	}
	return progressbar.NewOptions64(total,
		progressbar.OptionSetWriter(a.stderr),
		progressbar.OptionShowBytes(true),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionThrottle(200*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
}

func writeStats(w io.Writer, st stream.Stats) {
	p := func(name string, v any) { fmt.Fprintf(w, "convtag: %-16s %v\n", name, v) }
	p("records in", st.Records)
	p("records out", st.Written)
	tags := make([]string, 0, len(st.Tags))
	for t := range st.Tags {
		tags = append(tags, t)
	}
	sort.Strings(tags)
	for _, t := range tags {
		p("  tag "+t, st.Tags[t])
	}
	p("dropped", st.Dropped)
	p("rejected", st.Rejected)
	p("  malformed", st.Malformed)
	p("  not a string", st.NotString)
	p("  too long", st.TooLong)
	p("passed through", st.Passed)
	p("  no text", st.NoText)
	p("  blank", st.Blank)
	p("text lines", st.Text)
	p("no words", st.NoWords)
	p("CRLF lines", st.CRLF)
	p("invalid UTF-8", st.InvalidUTF8)
	p("seconds", fmt.Sprintf("%.3f", st.Elapsed.Seconds()))
	p("records/s", fmt.Sprintf("%.0f", st.RecordsPerSecond()))
}
