package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strings"
	"syscall"
	"time"

	"github.com/spf13/cobra"

	"convtag/model"
	"convtag/stream"
)

func init() { commands = append(commands, newTagCmd) }

// newTagger adapts m to the pipeline: with why > 0 its scorers also
// explain each tag (see whyTagger), otherwise they do no such work. The
// tagger owns m: the pipeline's Switch releases it, closing (unmapping) m,
// once a reload has replaced it and the last block it tagged is written.
func newTagger(m *model.Model, why int) stream.Tagger {
	if why > 0 {
		return releasingWhy{whyTagger{m: m, n: why}}
	}
	return modelTagger{m}
}

// modelTagger adapts a *model.Model to stream.Tagger.
type modelTagger struct{ m *model.Model }

func (t modelTagger) Labels() []string { return t.m.Labels }

func (t modelTagger) NewScorer() stream.Scorer { return predictorScorer{t.m.NewPredictor()} }

// Release unmaps the model (stream.Releaser); no scorer is used after it.
func (t modelTagger) Release() { t.m.Close() }

// releasingWhy is a whyTagger that owns its model, as modelTagger does.
type releasingWhy struct{ whyTagger }

func (t releasingWhy) Release() { t.m.Close() }

type predictorScorer struct{ p *model.Predictor }

func (s predictorScorer) Score(text []byte) []float32 { return s.p.Predict(text) }

// Words tells the pipeline that a text without a token gets the unsure tag
// (stream.WordCounter).
func (s predictorScorer) Words() int { return s.p.TokenCount() }

// Known is how many of the last text's tokens the model has a row of its
// own for (stream.KnownCounter).
func (s predictorScorer) Known() int { return s.p.KnownCount() }

// maxShownProblems caps the record problems printed on stderr; --stats
// has the counts of all of them.
const maxShownProblems = 20

func newTagCmd(a *app) *cobra.Command {
	var (
		modelPath, format, emit, output, compress, rejects, progress string
		minConf, thresholdsFile, shard                               string
		rule                                                         confidenceRule
		textKeys, textColumns, keep, drop                            []string
		o                                                            stream.Options
		strict, showStats                                            bool
		why                                                          int
		cf                                                           confirmFlags
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

--format csv and --format tsv read RFC 4180 records (TSV: tab-separated,
the same quoting) after a header row; the text is in the --text-column
columns (default text). Each record keeps its bytes and gets two fields
appended, the tag and the confidence, named by --tag-key and
--confidence-key in the header. A quoted field may hold line breaks. A
header without the text column, with a name twice, or with the tag or
confidence column already is an error (exit 2); a record with the wrong
number of fields passes through unchanged and is counted.

Every record read gives one record written, unless --keep or --drop leaves
it out. Records that cannot be tagged pass through unchanged and are counted
(or go to the --rejects file): malformed JSON, a text key holding a number,
boolean, array or object, a line longer than 64 MiB. Empty and blank lines
and JSON records without the text key pass through unchanged; when none of
the first 1,000 JSON records has the key, one warning names the keys they
have. With --keep, untagged records are left out too.

On a multi-label model (train --multi-label) a record gets "tags" (key
--tags-key): every tag whose probability reaches the tag's threshold stored
in the model, highest first, or [] when none does, and the confidence key
holds those tags' probabilities; --min-confidence TAG=P replaces a stored
threshold. --keep and --drop match a record when any of its tags is listed
(one with no tag matches the --unsure-tag). Text written as TSV, and CSV or
TSV records, get the tags and their probabilities joined with commas. --scores, --top and
--why go into JSON output only: with --format text they need --emit jsonl;
with --format auto, text lines written as TSV go without them.

No output file is lost either. Every input is opened, and no two of the
inputs, -o, --rejects, the model and a redirected standard input or output
may be one file (exit 2), before any output is created. Without --append,
-o FILE and --rejects FILE are written to a temporary file beside FILE and
renamed onto it only when every input was read and written (exit 0, or 3
under --strict); after any other end FILE is left as it was, and the error
says so. FILE thus appears at the end: for a live stream give --append,
which writes in place. A .gz or .zst FILE to --append to must decode to its
end (a killed run may have cut it); otherwise nothing is written, exit 1.
A standard output closed at the start (>&-) is an error, exit 1.

--confirm (with --append -o FILE) is for rsyslog's omprog with
confirmMessages="on": standard output then carries only the protocol's
replies (OK once ready; OK per message, or OK and DEFER_COMMIT within
useTransactions, each after the record is written to FILE; an "error: ..."
line when a write fails, so rsyslog sends the message again). --fsync syncs
FILE before each confirmation.

Without -m, tag uses the built-in model: a demonstration (positive or
negative sentiment, trained on product, film and restaurant reviews), not
fit for moderation or any decision about a person. A tag is a guess: do not
act on a person on a tag alone; route records under --min-confidence to a
person, and keep the confidence (and --why) with each decision (README,
"Before you act on a tag").

Signals: SIGINT and SIGTERM stop after writing whole lines, exit status 1.
SIGHUP reopens the model file between two blocks (a file that fails any
check of inspect --verify is reported and the old model kept) and, with
--append, reopens the --output file. The model file is memory-mapped:
replace it by rename (mv), as train -o does, never by writing over it. An
in-place write changes or removes pages under the running filter: a shorter
file stops it with exit status 1 after the whole records tagged so far, and
a same-size overwrite would switch the model in the middle of a block.

` + exitHelpStrict,
		Example: `  convtag tag chat.jsonl > tagged.jsonl
  zstd -dc archive.jsonl.zst | convtag tag -m ferry.safetensors --keep schedule
  convtag tag --format text --emit jsonl notes.txt
  tail -F service.log | convtag tag -k msg --min-confidence 0.6 --append -o tagged.jsonl.gz
  convtag tag -m desks.safetensors --min-confidence spam=0.9 --keep tickets,praise testdata/demo/chat.jsonl`,
		RunE: func(cmd *cobra.Command, args []string) error {
			var err error
			if rule, err = parseMinConfidence(minConf); err != nil {
				return err
			}
			if shard != "" {
				if o.Shard, err = stream.ParseShard(shard); err != nil {
					return usageErr("convtag tag --shard 3/8 -o part-3.jsonl chat.jsonl", "--shard: %v", err)
				}
				switch {
				case len(args) != 1 || args[0] == "-":
					return usageErr("convtag tag --shard 3/8 -o part-3.jsonl chat.jsonl", "--shard takes one input file (not standard input); for several files, give each task a file")
				case format == "csv" || format == "tsv":
					return usageErr("convtag tag --format "+format+" chat."+format, "--shard: a %s file's header is in its first part only; shard JSON Lines or text", format)
				case o.Append:
					return usageErr("convtag tag --shard 3/8 -o part-3.jsonl chat.jsonl", "--shard with --append: a part's output must be replaced whole when a task is run again")
				}
			}
			if err := checkTagFlags(&o, format, emit, compress, progress, output, why, textKeys); err != nil {
				return err
			}
			if err := cf.check(&o, args, output, progress, shard != ""); err != nil {
				return err
			}
			if err := tagColumns(&o, textKeys, textColumns, why); err != nil {
				return err
			}
			o.Keep, o.Drop = splitTags(keep), splitTags(drop)
			o.Output = output
			if output == "" || output == "-" {
				if f, ok := a.stdout.(*os.File); ok && stdoutClosedAtStart(f) {
					return withCode(exitFailure, errors.New("standard output is closed: the output would go nowhere (give -o FILE, or >/dev/null to discard it)"))
				}
			}

			m, err := a.loadModel(modelPath)
			if err != nil {
				return err
			}
			trainedShare := trainedKnownShare(m)
			if err := applyConfidence(&o, rule, thresholdsFile, m.Labels); err != nil {
				return err
			}
			if slices.Contains(m.Labels, o.UnsureTag) {
				return usageErr("convtag tag --unsure-tag unsure", "--unsure-tag %q is one of the model's tags (%s): unsure records could not be told apart", o.UnsureTag, strings.Join(m.Labels, ", "))
			}
			tags := append(slices.Clone(m.Labels), o.UnsureTag)
			for _, t := range append(slices.Clone(o.Keep), o.Drop...) {
				if !slices.Contains(tags, t) {
					return usageErr("convtag inspect "+modelPath, "no tag %q in the model (its tags: %s)", t, strings.Join(tags, ", "))
				}
			}
			o.Tagger = newTagger(m, why)
			o.Why = why > 0

			// Every input is opened and checked, and no two of them and the
			// outputs may be one file, before any output is created.
			if err := checkInputs(a, args); err != nil {
				return err
			}
			if err := checkSameFiles(a, args, modelPath, output, rejects); err != nil {
				return err
			}
			existed := func(path string) bool { _, err := os.Stat(path); return err == nil }
			var unchanged []string // files a failed run leaves as they were
			if output != "" && output != "-" && !o.Append && replacedFile(output) {
				unchanged = append(unchanged, leftMessage(output, existed(output)))
			}
			var rej *stream.OutputFile
			if rejects != "" && cf.on {
				f, err := cf.openRejects(rejects)
				if err != nil {
					return withCode(exitFailure, err)
				}
				defer f.Close()
				o.Rejects = f
			} else if rejects != "" {
				rejExisted := existed(rejects)
				if rej, err = stream.CreateOutputFile(rejects); err != nil {
					return withCode(exitFailure, fmt.Errorf("--rejects: %w", err))
				}
				defer rej.Discard() // after Commit it does nothing
				if rej.Replaces() {
					unchanged = append(unchanged, leftMessage(rejects, rejExisted))
				}
				o.Rejects = rej
			}

			shown, problems, inputProblems := 0, 0, 0
			o.OnError = func(err error) {
				var ie *stream.InputError
				if errors.As(err, &ie) {
					// Shown as they come: once each, in input order, and
					// before an interruption could drop them.
					inputProblems++
					fmt.Fprintf(a.stderr, "convtag: %v\n", err)
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
			o.Switch.Set(o.Tagger) // the Switch releases it when a reload replaces it
			hup := make(chan os.Signal, 1)
			signal.Notify(hup, syscall.SIGHUP)
			defer signal.Stop(hup)
			hupDone := make(chan struct{})
			defer close(hupDone)
			go reloadOnHangup(a, modelPath, why, o.Switch, hup, hupDone)

			bar := newProgress(a, progress, args)
			if bar != nil {
				o.Progress = bar.update
			}

			started, inputBytes := time.Now(), int64(0)
			if o.Shard.N > 0 {
				if fi, err := os.Stat(args[0]); err == nil {
					inputBytes = fi.Size()
				}
			}
			var st stream.Stats
			if cf.on {
				st, err = cf.run(ctx, a, o)
			} else {
				st, err = stream.Run(ctx, o, args, a.stdin, a.stdout)
			}
			if bar != nil {
				bar.end(st, err == nil)
			}
			if err == nil && o.Shard.N > 0 && output != "" && output != "-" {
				// Written last: a part whose stats file exists is done.
				err = writeShardStats(output, args[0], inputBytes, started, o.Shard, st)
			}
			if err == nil && rej != nil {
				if err = rej.Commit(); err != nil {
					err = fmt.Errorf("--rejects: %w", err)
				}
			}
			if showStats {
				writeStats(a.stderr, st, o, trainedShare)
			}
			var ie *stream.InputError
			if errors.As(err, &ie) && inputProblems > 0 {
				err = fmt.Errorf("%d of %d inputs not read to the end", inputProblems, max(1, len(args)))
			}
			left := strings.Join(unchanged, "; ")
			switch {
			case errors.Is(err, stream.ErrOutputClosed):
				if left != "" {
					fmt.Fprintf(a.stderr, "convtag: %s\n", left)
				}
				return nil // the reader went away: end quietly, as filters do
			case errors.Is(err, context.Canceled):
				err = errors.New("interrupted")
			case err != nil:
			case strict && st.Rejected > 0:
				return withCode(exitRejected, fmt.Errorf("%d records rejected (--strict)", st.Rejected))
			default:
				return nil
			}
			if left != "" {
				err = fmt.Errorf("%w; %s", err, left)
			}
			var he *stream.HeaderError
			if errors.As(err, &he) {
				return headerErr(err, false)
			}
			return withCode(exitFailure, err)
		},
	}
	f := c.Flags()
	f.StringVarP(&modelPath, "model", "m", "", "model file (default: the built-in model)")
	f.StringVar(&format, "format", "auto", "input kind: auto (a line starting with '{' is JSON), jsonl, text, or csv or tsv (with a header row)")
	f.StringArrayVarP(&textKeys, "text-key", "k", nil, "dotted path of the text in a JSON record; repeat to join several with a space (default text)")
	f.StringArrayVar(&textColumns, "text-column", nil, "csv/tsv: header name of the text column; repeat to join several with a space (default text)")
	f.StringVar(&o.TagKey, "tag-key", "tag", "key of the added tag (for csv/tsv: the name of the added column)")
	f.StringVar(&o.ConfidenceKey, "confidence-key", "confidence", "key of the added confidence (rounded to 4 decimals)")
	f.StringVar(&o.TagsKey, "tags-key", "tags", "multi-label model: key of the added array of tags (for csv/tsv: the name of the added column)")
	f.BoolVar(&o.Scores, "scores", false, `add every label's probability as an object under "scores" (JSON output)`)
	f.IntVar(&o.Top, "top", 0, `add the N best labels, best first, as an array under "top" (JSON output)`)
	f.IntVar(&why, "why", 0, `add the N word windows that weighed most for the tag, as an array under "why" (JSON output)`)
	f.StringVar(&o.KnownKey, "known-key", "", "add each record's share of words the model knows from training under this key (JSON output)")
	f.StringVar(&a.scorer, "scorer", "", "score with the network, the linear baseline (baseline) or their mix (combined) instead of what the model file says (train --mix-baseline stores a baseline)")
	f.StringVar(&minConf, "min-confidence", "", "below this probability the record gets the --unsure-tag: P, or per label LABEL=P[,LABEL=P...] with an optional bare P for the rest")
	f.StringVar(&shard, "shard", "", "tag only part K of N of one uncompressed FILE (K/N): the records starting in its K-th N-th by bytes; parts 1..N joined in order are the whole run's output")
	f.StringVar(&thresholdsFile, "thresholds", "", "per-label minimum confidences from FILE, as written by eval --json --target-precision P (--min-confidence overrides them)")
	f.StringVar(&o.UnsureTag, "unsure-tag", "unsure", "tag for records below --min-confidence and texts without a word")
	f.StringSliceVar(&keep, "keep", nil, "write only records with one of these tags (TAG[,TAG])")
	f.StringSliceVar(&drop, "drop", nil, "leave out records with one of these tags (TAG[,TAG])")
	f.StringVar(&emit, "emit", "tsv", "how text lines are written: tsv (tag TAB confidence TAB line) or jsonl")
	f.StringVarP(&output, "output", "o", "", "write to FILE (compressed by its suffix .gz or .zst)")
	f.BoolVar(&o.Append, "append", false, "with --output: add to FILE in place, instead of replacing it when the run ends (for a live stream, or a filter a log daemon restarts)")
	f.StringVar(&compress, "compress", "auto", "output compression: auto (by --output suffix), none, gzip or zstd")
	f.IntVarP(&o.Jobs, "jobs", "j", 0, "workers (default: all cores; at most 1024)")
	f.IntVar(&o.BlockSize, "block-size", 0, "bytes of input a worker takes at a time (default 1048576; at most 268435456)")
	f.StringVar(&rejects, "rejects", "", "write records that cannot be tagged to FILE instead of the output")
	f.BoolVar(&strict, "strict", false, "exit with status 3 at the end if any record was rejected")
	f.StringVar(&progress, "progress", "auto", "progress bar on stderr (bytes read of the inputs' size, records, records/s): auto (when stderr is a terminal and the input size is known), on or off")
	f.BoolVar(&showStats, "stats", false, "print a closing summary on stderr")
	cf.flags(f)
	return c
}

// Bounds on the worker flags: beyond them a run only costs memory. Each
// worker keeps three blocks of --block-size bytes in flight (stream's window),
// so their product is bounded too.
const (
	maxJobs     = 1024
	maxBlock    = 256 << 20
	maxInFlight = 4 << 30
)

// checkTagFlags turns the flag values that need no model into o, or
// returns the usage error for the first that is wrong.
func checkTagFlags(o *stream.Options, format, emit, compress, progress, output string, why int, textKeys []string) error {
	var err error
	if o.Format, err = stream.ParseFormat(format); err != nil {
		return usageErr("convtag tag --format auto|jsonl|text|csv|tsv", "--format: %v", err)
	}
	if o.Emit, err = stream.ParseEmit(emit); err != nil {
		return usageErr("convtag tag --emit tsv|jsonl", "--emit: %v", err)
	}
	if o.Compress, err = stream.ParseCompress(compress); err != nil {
		return usageErr("convtag tag --compress auto|none|gzip|zstd", "--compress: %v", err)
	}
	for _, c := range []struct {
		flag     string
		v, limit int
	}{{"--why", why, -1}, {"--top", o.Top, -1}, {"--jobs", o.Jobs, maxJobs}, {"--block-size", o.BlockSize, maxBlock}} {
		if c.v < 0 {
			return usageErr("convtag tag --help", "%s %d: must not be negative", c.flag, c.v)
		}
		if c.limit > 0 && c.v > c.limit {
			return usageErr("convtag tag --help", "%s %d: at most %d", c.flag, c.v, c.limit)
		}
	}
	jobs, block := o.Jobs, o.BlockSize
	if jobs == 0 {
		jobs = runtime.GOMAXPROCS(0)
	}
	if block == 0 {
		block = stream.DefaultBlockSize
	}
	if n := int64(max(2, 3*jobs)) * int64(block); n > maxInFlight {
		return usageErr("convtag tag --help", "--jobs %d with --block-size %d keeps %d MiB in flight: at most %d MiB", jobs, block, n>>20, maxInFlight>>20)
	}
	switch progress {
	case "auto", "on", "off":
	default:
		return usageErr("convtag tag --progress auto|on|off", "--progress: unknown value %q", progress)
	}
	if o.Append && (output == "" || output == "-") {
		return usageErr("convtag tag --append -o FILE", "--append needs -o FILE: standard output is never truncated")
	}
	if o.Format == stream.InputText && o.Emit == stream.EmitTSV {
		for _, c := range []struct {
			flag string
			on   bool
		}{{"--scores", o.Scores}, {"--top", o.Top > 0}, {"--why", why > 0}, {"--known-key", o.KnownKey != ""}} {
			if c.on {
				return usageErr("convtag tag --format text --emit jsonl "+c.flag+" ...", "%s: text lines written as TSV have no place for it", c.flag)
			}
		}
	}
	// The keys added to every record; none may be empty or another's.
	type key struct{ flag, name string }
	keys := []key{{"--tag-key", o.TagKey}, {"--confidence-key", o.ConfidenceKey}}
	if o.TagsKey != o.TagKey {
		keys = append(keys, key{"--tags-key", o.TagsKey})
	}
	if o.Scores {
		keys = append(keys, key{"--scores", "scores"})
	}
	if o.Top > 0 {
		keys = append(keys, key{"--top", "top"})
	}
	if why > 0 {
		keys = append(keys, key{"--why", "why"})
	}
	if o.KnownKey != "" {
		keys = append(keys, key{"--known-key", o.KnownKey})
	}
	for i, k := range keys {
		if k.name == "" {
			return usageErr("convtag tag "+k.flag+" NAME", "%s: empty key", k.flag)
		}
		for _, prev := range keys[:i] {
			if prev.name == k.name {
				return usageErr("convtag tag "+k.flag+" OTHER-NAME", "%s %q: %s adds that key already", k.flag, k.name, prev.flag)
			}
		}
	}
	for _, tk := range textKeys {
		parts := strings.Split(tk, ".")
		if slices.Contains(parts, "") {
			return usageErr("convtag tag -k msg or -k body.text", "-k %q: empty key or empty part of a dotted path", tk)
		}
		for _, k := range keys {
			if parts[0] == k.name {
				return usageErr("convtag tag "+k.flag+" OTHER-NAME", "-k %q: the key %s adds would overwrite the text", tk, k.flag)
			}
		}
	}
	return nil
}

// checkInputs opens every input file and checks that it can be read (no
// directory), so that a missing one stops the run before any output file
// is created or changed.
func checkInputs(a *app, inputs []string) error {
	var bad []string
	for _, name := range inputs {
		if name == "-" {
			continue
		}
		f, err := os.Open(name)
		if err == nil {
			var st os.FileInfo
			if st, err = f.Stat(); err == nil && st.IsDir() {
				err = errors.New("is a directory")
			}
			f.Close()
		}
		if err != nil {
			var pe *os.PathError
			if errors.As(err, &pe) {
				err = pe.Err
			}
			bad = append(bad, fmt.Sprintf("%s: %v", name, err))
		}
	}
	if len(bad) == 0 {
		return nil
	}
	for _, b := range bad[:len(bad)-1] {
		fmt.Fprintf(a.stderr, "convtag: %s\n", b)
	}
	return withCode(exitFailure, fmt.Errorf("%s; nothing was written", bad[len(bad)-1]))
}

// checkSameFiles refuses a run where an output (-o, --rejects, or
// standard output redirected to a file) is the same file as an input, the
// model or the other output: it would be overwritten while being read, or
// hold two streams at once. Files are compared by device and inode
// (os.SameFile); only regular files count (a device like /dev/null may be
// both).
func checkSameFiles(a *app, inputs []string, modelPath, output, rejects string) error {
	type file struct {
		what string
		st   os.FileInfo
	}
	stat := func(what, path string) []file {
		if st, err := os.Stat(path); err == nil && st.Mode().IsRegular() {
			return []file{{what, st}}
		}
		return nil
	}
	fstat := func(what string, f any) []file {
		if f, ok := f.(*os.File); ok {
			if st, err := f.Stat(); err == nil && st.Mode().IsRegular() {
				return []file{{what, st}}
			}
		}
		return nil
	}
	var ins, outs []file
	usesStdin := len(inputs) == 0
	for _, name := range inputs {
		if name == "-" {
			usesStdin = true
			continue
		}
		ins = append(ins, stat("input "+name, name)...)
	}
	if usesStdin {
		ins = append(ins, fstat("standard input", a.stdin)...)
	}
	if modelPath != "" {
		ins = append(ins, stat("model "+modelPath, modelPath)...)
	}
	if output == "" || output == "-" {
		outs = append(outs, fstat("standard output", a.stdout)...)
	} else {
		outs = append(outs, stat("-o "+output, output)...)
	}
	if rejects != "" {
		outs = append(outs, stat("--rejects "+rejects, rejects)...)
	}
	for i, o := range outs {
		for _, other := range append(slices.Clone(outs[:i]), ins...) {
			if os.SameFile(o.st, other.st) {
				return usageErr("convtag tag -o NEW-FILE ..., then mv NEW-FILE over the old one", "%s is the same file as %s", o.what, other.what)
			}
		}
	}
	// Two outputs that do not exist yet are one file when their paths,
	// with the directory's links resolved, are equal.
	if output != "" && output != "-" && rejects != "" {
		if p, q := newPath(output), newPath(rejects); p != "" && p == q {
			return usageErr("convtag tag -o FILE --rejects OTHER-FILE", "-o %s and --rejects %s are one file", output, rejects)
		}
	}
	return nil
}

// newPath is the absolute path, its directory's links resolved, of a file
// that does not exist yet, or "" for one that exists.
func newPath(path string) string {
	if _, err := os.Lstat(path); err == nil {
		return ""
	}
	dir, err := filepath.EvalSymlinks(filepath.Dir(path))
	if err != nil {
		return ""
	}
	abs, err := filepath.Abs(filepath.Join(dir, filepath.Base(path)))
	if err != nil {
		return ""
	}
	return abs
}

// replacedFile reports whether -o path is written under a temporary name
// (a regular file, or none yet) rather than in place (a device, a FIFO).
func replacedFile(path string) bool {
	st, err := os.Stat(path)
	return err != nil || st.Mode().IsRegular()
}

func leftMessage(path string, existed bool) string {
	if existed {
		return path + " left unchanged"
	}
	return path + " not written"
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

// knownShareGap is how far (in share of words) a stream's known words may
// fall below the dev records' before --stats warns; a rule of thumb.
const knownShareGap = 0.25

// trainedKnownShare is the dev records' share of known words stored in m's
// training summary, or nil.
func trainedKnownShare(m *model.Model) *float64 {
	var s trainSummary
	if json.Unmarshal([]byte(m.Meta[model.MetaTraining]), &s) != nil {
		return nil
	}
	return s.DevKnownShare
}

// writeStats prints the closing --stats summary. The records for a person
// to look at are those tagged unsure: below --min-confidence, or with no
// word the model knows of at all.
func writeStats(w io.Writer, st stream.Stats, o stream.Options, trainedShare *float64) {
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
	review := st.Tags[o.UnsureTag]
	if o.MinConfidence > 0 || len(o.MinConfidenceFor) > 0 {
		p(fmt.Sprintf("for review (below %s)", describeThresholds(o)), review-st.NoWords)
	} else {
		p("for review", "0 (no --min-confidence)")
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
	if st.Words > 0 {
		share := float64(st.Known) / float64(st.Words)
		p("known words", fmt.Sprintf("%.1f%% of %d", 100*share, st.Words))
		if trainedShare != nil {
			p("  in dev records", fmt.Sprintf("%.1f%%", 100**trainedShare))
			if share < *trainedShare-knownShareGap && st.Words >= 200 {
				fmt.Fprintf(w, "convtag: warning: the model knows %.0f%% of these records' words, against %.0f%% of its dev records': this text is unlike what it was trained on (another language or domain?), so its tags are less to be trusted\n",
					100*share, 100**trainedShare)
			}
		}
	}
	p("CRLF lines", st.CRLF)
	p("invalid UTF-8", st.InvalidUTF8)
	p("seconds", fmt.Sprintf("%.3f", st.Elapsed.Seconds()))
	p("records/s", fmt.Sprintf("%.0f", st.RecordsPerSecond()))
}
