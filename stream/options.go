package stream

import (
	"fmt"
	"io"
	"sync"
	"time"
)

// InputFormat is the kind of input records.
type InputFormat int

const (
	// InputAuto decides per line: a line whose first byte after spaces and
	// tabs is '{' is a JSON record, any other line is text. A '{' line that
	// is not valid JSON and does not begin like an object ('{' then a
	// quoted key or '}') is text too: braces in prose.
	InputAuto InputFormat = iota
	// InputJSONL treats every line as a JSON record; a line that is not a
	// valid JSON object is malformed.
	InputJSONL
	// InputText treats every line as text, even one that looks like JSON.
	InputText
	// InputCSV reads RFC 4180 records (comma-separated, fields in double
	// quotes where needed) after a header row that names the columns;
	// TextKeys are then column names. A quoted field may hold line
	// breaks. See csv.go for the rules.
	InputCSV
	// InputTSV is InputCSV with a tab as the separator (the same quoting).
	InputTSV
)

// Emit is how a text line is written.
type Emit int

const (
	// EmitTSV writes tag, TAB, confidence, TAB, then the original line.
	EmitTSV Emit = iota
	// EmitJSONL writes a JSON object {"text": line, tag key, confidence key, ...}.
	EmitJSONL
)

// Compress is the output's compression.
type Compress int

const (
	// CompressAuto picks by the output file's suffix: .gz is gzip, .zst is
	// zstd, anything else (and standard output) is uncompressed.
	CompressAuto Compress = iota
	CompressNone
	CompressGzip
	CompressZstd
)

// ParseFormat, ParseEmit and ParseCompress read the names the command line
// uses.
func ParseFormat(s string) (InputFormat, error) {
	switch s {
	case "auto", "":
		return InputAuto, nil
	case "jsonl":
		return InputJSONL, nil
	case "text":
		return InputText, nil
	case "csv":
		return InputCSV, nil
	case "tsv":
		return InputTSV, nil
	}
	return 0, fmt.Errorf("unknown format %q (want auto, jsonl, text, csv or tsv)", s)
}

// ParseEmit reads "tsv" or "jsonl".
func ParseEmit(s string) (Emit, error) {
	switch s {
	case "tsv", "":
		return EmitTSV, nil
	case "jsonl":
		return EmitJSONL, nil
	}
	return 0, fmt.Errorf("unknown emit kind %q (want tsv or jsonl)", s)
}

// ParseCompress reads "auto", "none", "gzip" or "zstd".
func ParseCompress(s string) (Compress, error) {
	switch s {
	case "auto", "":
		return CompressAuto, nil
	case "none":
		return CompressNone, nil
	case "gzip":
		return CompressGzip, nil
	case "zstd":
		return CompressZstd, nil
	}
	return 0, fmt.Errorf("unknown compression %q (want auto, none, gzip or zstd)", s)
}

// Limits and defaults, in one place.
const (
	// DefaultBlockSize is how much input a worker takes at a time.
	DefaultBlockSize = 1 << 20
	// DefaultMaxLine is the longest line that is tagged; a longer one is
	// passed through untouched (or to the rejects file) and counted.
	DefaultMaxLine = 64 << 20
	// DefaultPause is how long the input may be idle before the lines read
	// so far are tagged and written without waiting for a full block.
	DefaultPause = 2 * time.Millisecond
	// blocksPerWorker bounds the blocks in flight (read, being tagged, or
	// waiting to be written in order): memory stays flat and a slow reader
	// downstream slows the input down.
	blocksPerWorker = 3
	// maxKeepCap is the largest buffer a block keeps for reuse, so one huge
	// line does not pin its memory for the rest of the run.
	maxKeepCap = 4 * DefaultBlockSize
)

// Options control Run. The zero value, with a Tagger, is useful: input kind
// decided per line, text at key "text", keys "tag" and "confidence" added,
// text lines written as tag TAB confidence TAB line, every record kept, one
// worker per core, output uncompressed to the writer given to Run.
type Options struct {
	// Tagger classifies texts; required. See also Switch.
	Tagger Tagger
	// Switch, if set, lets the caller replace the Tagger while Run runs.
	Switch *Switch

	Format InputFormat
	// TextKeys are dotted paths to the text in a JSON record ("text" when
	// empty). The strings found are joined with one space. An array of
	// integers 0..255 is the bytes of a text, as journalctl -o json writes a
	// field that is not valid UTF-8. A path's value that is null or absent
	// adds nothing; a number, boolean, other array or object adds nothing
	// and the record counts as NotString. A record where no path holds a
	// text is passed through untouched. A record may start with an ASCII
	// record separator (0x1E), as in JSON text sequences (journalctl -o
	// json-seq); it is kept, and the tags go inside the object after it.
	TextKeys []string
	// TagKey and ConfidenceKey name the added keys ("tag", "confidence");
	// for CSV and TSV, the two columns appended to every record, the
	// header's names included (a header that has either already is an
	// error).
	TagKey, ConfidenceKey string
	// TagsKey ("tags") names the key of a MultiTagger's tags: an array of
	// the labels that pass, highest probability first, empty when none
	// does; ConfidenceKey then holds an object of those labels'
	// probabilities. For text lines written as TSV the first column is
	// the tags joined with commas (empty when none) and the second their
	// probabilities, joined the same way; for CSV and TSV input the two
	// added columns are the same (the first named TagsKey).
	TagsKey string
	// Scores adds an object of every label's probability under ScoresKey
	// ("scores"); Top > 0 adds the Top best labels, best first, as an
	// array of {tag, confidence} objects under TopKey ("top"). Both apply
	// to JSON output only (JSON records, and text lines under EmitJSONL).
	Scores    bool
	ScoresKey string
	Top       int
	TopKey    string
	// Why adds, under WhyKey ("why"), the evidence for each tag that the
	// Scorer gives when it is an Explainer (an empty array otherwise).
	// JSON output only, like Scores.
	Why    bool
	WhyKey string
	// Shard, when N > 0, reads only that part of the one input file (an
	// uncompressed regular file); see Shard.
	Shard Shard
	// KnownKey, when set, adds under that key each tagged record's share
	// of words the classifier knows (KnownCounter), rounded to 4
	// decimals, or null when the Scorer cannot tell; JSON output only.
	KnownKey string
	// MinConfidence: a record whose best probability is below it gets
	// UnsureTag ("unsure") as its tag; its confidence stays the best
	// probability. A text without a word (only punctuation, or empty, as
	// the Scorer counts words when it is a WordCounter) gets UnsureTag with
	// confidence 0, an empty Scores object and empty Top and Why arrays.
	MinConfidence float64
	// MinConfidenceFor overrides MinConfidence for the labels it names:
	// a record whose best label is L needs MinConfidenceFor[L]. A value
	// above 1 tags every record of that label unsure (for a label whose
	// target precision was never reached). Names the Tagger lacks are
	// ignored (a reloaded model may have other labels).
	//
	// With a MultiTagger they replace its thresholds: MinConfidenceFor[L]
	// for L, else MinConfidence when above 0, else the stored threshold.
	MinConfidenceFor map[string]float64
	UnsureTag        string
	// Keep, when not empty, writes only records whose tag is in it; Drop
	// leaves out records whose tag is in it. A record passed through
	// untagged has no tag: Keep leaves it out, Drop keeps it. With a
	// MultiTagger a record matches when any of its tags is listed; one
	// with no tag matches UnsureTag (and is counted under it in Stats.Tags,
	// where each record counts once for each of its tags).
	Keep, Drop []string
	Emit       Emit

	// Jobs is the number of workers (GOMAXPROCS when 0). With 1 the
	// pipeline runs sequentially, with the same output.
	Jobs int
	// BlockSize is the input block a worker takes (DefaultBlockSize when 0).
	BlockSize int
	// MaxLine is the longest line tagged (DefaultMaxLine when 0).
	MaxLine int
	// Pause is the idle time after which a partial block is processed
	// (DefaultPause when 0).
	Pause time.Duration

	// Output is a file to write instead of Run's writer ("" or "-": the
	// writer). Compress chooses its compression. Without Append, a regular
	// or new file is written under a temporary name beside it and renamed
	// onto it only when Run returns nil; on any error the file is left as
	// it was. A device or FIFO is written in place.
	Output   string
	Compress Compress
	// Append adds to an existing Output file instead of truncating it, for
	// a filter that a log daemon restarts; a compressed file must decode to
	// its end first (else ErrCutOutput). Each write to an uncompressed
	// output ends on a record boundary (a line over MaxLine aside), so a
	// killed run leaves whole lines.
	Append bool
	// Rejects, if set, receives the problem records (malformed JSON,
	// non-string text, overlong lines) instead of the output, unchanged
	// and in order.
	Rejects io.Writer
	// OnError is called, in input order, from one goroutine, with each
	// *RecordError and *InputError. It may be nil.
	OnError func(error)
	// Warn, if set, is called at most once, from the goroutine that calls
	// OnError, when none of the first 1,000 JSON records (or of all of
	// them, when there are fewer) has a value at any TextKeys path: most
	// likely a wrong key. The message names the keys and lists the
	// records' own top-level keys. The records pass through as always.
	Warn func(msg string)
	// Progress, if set, is called after each block is written with the raw
	// input bytes read so far (compressed size for compressed input) and
	// the records written so far.
	Progress func(bytesRead, records int64)
}

// Switch lets a caller replace the Tagger of a running pipeline, for example
// on SIGHUP. Its zero value is ready to use and safe for concurrent use.
//
// A Switch owns the Taggers given to Set: one that is a Releaser is
// released once it has been replaced and the last block tagged with it has
// been written (see Releaser). The Tagger current when Run ends stays held.
// Options.Tagger stays the caller's; Run uses it only while the Switch
// holds no Tagger, so a Tagger Set before Run is the one Run starts with.
type Switch struct {
	mu  sync.Mutex
	gen uint64      // Sets so far
	cur *heldTagger // nil until the first Set with a Tagger
}

// Set makes t (when not nil) the Tagger for every block cut after Set
// returns, and asks the pipeline to reopen its output file before writing
// that block (after everything before it was written and flushed), as log
// rotation needs. Records are neither lost nor reordered: the switch falls
// between two blocks. Set(nil) only reopens the output. Give each Tagger to
// Set once: the Switch releases it when it is replaced.
func (s *Switch) Set(t Tagger) {
	var old *heldTagger
	s.mu.Lock()
	if t != nil {
		h := &heldTagger{t: t}
		h.refs.Store(1) // the Switch's, while h is current
		old, s.cur = s.cur, h
	}
	s.gen++
	s.mu.Unlock()
	if old != nil {
		old.release()
	}
}

// acquire returns the current Tagger with one reference taken for the
// caller (nil when the Switch holds none) and the count of Sets so far,
// read together.
func (s *Switch) acquire() (*heldTagger, uint64) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.cur != nil {
		s.cur.refs.Add(1)
	}
	return s.cur, s.gen
}

// Stats count what Run did.
type Stats struct {
	Records     int64            // lines read, of every kind
	Written     int64            // records written to the output
	Tags        map[string]int64 // records tagged, by tag (before Keep/Drop)
	Dropped     int64            // left out by Keep or Drop
	Rejected    int64            // problem records: Malformed + NotString + TooLong
	Malformed   int64            // invalid JSON where JSON was expected
	NotString   int64            // text path holding a non-string value
	TooLong     int64            // lines over MaxLine
	NoText      int64            // JSON records without any text path
	Blank       int64            // empty or blank lines, passed through
	CRLF        int64            // records ending in "\r\n"
	InvalidUTF8 int64            // tagged texts that were not valid UTF-8
	Passed      int64            // records written unchanged, without a tag
	Text        int64            // lines read as text (not JSON), tagged
	NoWords     int64            // tagged texts without a word: UnsureTag, confidence 0
	Words       int64            // words of the tagged texts (when the Scorer is a KnownCounter)
	Known       int64            // of those, words the classifier knows from training
	Bytes       int64            // decoded input bytes
	Elapsed     time.Duration
}

// RecordsPerSecond is Records over Elapsed.
func (s Stats) RecordsPerSecond() float64 {
	if s.Elapsed <= 0 {
		return 0
	}
	return float64(s.Records) / s.Elapsed.Seconds()
}
