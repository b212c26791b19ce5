package stream

// Tagger is the classifier the pipeline runs. It is shared by all workers
// and must be safe for concurrent use; each worker makes its own Scorer.
type Tagger interface {
	// Labels are the tag names, in the order Score reports them.
	Labels() []string
	// NewScorer returns per-worker scratch for scoring. It is used by one
	// goroutine at a time.
	NewScorer() Scorer
}

// Scorer scores one text at a time.
type Scorer interface {
	// Score returns one probability per label for text. The slice is owned
	// by the Scorer and valid until the next call.
	Score(text []byte) []float32
}

// Explainer is a Scorer that can also say why: after Score, AppendWhy
// appends to dst the last text's evidence as one JSON value. The pipeline
// asks for it only when Options.Why is set, so scoring costs nothing extra
// otherwise.
type Explainer interface {
	Scorer
	AppendWhy(dst []byte) []byte
}

// WordCounter is a Scorer that can say how many words it found in the
// last text it scored. The pipeline gives a text with none the unsure tag
// and confidence 0 (see Options.MinConfidence) rather than whatever the
// classifier makes of an empty input.
type WordCounter interface {
	Scorer
	Words() int
}

// KnownCounter is a WordCounter that can also say how many of the last
// text's words the classifier knows from training. The pipeline sums both
// into Stats (Known, Words) and, with Options.KnownKey, adds each record's
// share of known words.
type KnownCounter interface {
	WordCounter
	Known() int
}

// MultiTagger is a Tagger of several tags per record: a record gets every
// label whose probability reaches that label's threshold, in order of
// probability (highest first), or none. Thresholds are aligned with
// Labels; a nil result makes the Tagger single-label after all.
// Options.MinConfidenceFor (and a MinConfidence above 0) override them.
type MultiTagger interface {
	Tagger
	Thresholds() []float64
}
