// Command gen builds the built-in model, default.safetensors, from the UCI
// "Sentiment Labelled Sentences" data set (Kotzias, Denil, de Freitas and
// Smyth, KDD 2015; CC BY 4.0): all 3,000 sentences of the three sources
// (amazon, imdb, yelp), tagged positive or negative. It is run by
// `go generate ./model/builtin` from that directory.
//
// It fetches the data (npm pack sentiment@5.0.2 into the git-ignored
// testdata/cache/uci) and runs the training recipe of `convtag train`
// (model/train's Recipe, the one the command's flags set), so the built-in
// model goes through exactly the code users train with. Settings, chosen to
// keep the file under 8 MB with its folded table: d = 128, widths 3,4,5 x
// 100 filters (Kim 2014), words seen at least 3 times get their own row
// (1,483 by a plain word count) and the rest share 500 buckets, the folded
// table in half precision; seed 1, -j 2, 10% held out for early stopping.
// That is `convtag train --vector-size 128 --widths 3,4,5 --filters 100
// --min-seen 3 --unseen-rows 500 --fold-half --seed 1 -j 2 --dev-fraction
// 0.1` on the three sources' JSON Lines files.
package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"convtag/model"
	"convtag/model/internal/uci"
	"convtag/model/train"
	"convtag/stream"
)

// maxSize is the most the built-in model may weigh.
const maxSize = 8 << 20

func main() {
	if err := run(); err != nil {
		fmt.Fprintf(os.Stderr, "gen: %v\n", err)
		os.Exit(1)
	}
}

func run() error {
	dir, err := uci.CacheDir()
	if err != nil {
		return err
	}
	if _, err := uci.Fetch(dir); err != nil {
		return err
	}
	out, err := filepath.Abs("default.safetensors")
	if err != nil {
		return err
	}
	r := train.Defaults()
	r.Dim, r.Widths, r.Filters = 128, []int{3, 4, 5}, 100
	r.MinSeen, r.Buckets, r.FoldHalf = 3, 500, true
	r.Seed, r.Jobs, r.DevFraction = 1, 2, 0.1
	var files []string
	for _, src := range uci.Sources {
		files = append(files, uci.JSONLPath(dir, src))
	}
	set, err := stream.ReadLabelled(files, stream.LabelledOptions{})
	if err != nil {
		return err
	}
	if set.Skipped > 0 {
		return fmt.Errorf("%d records skipped: %v", set.Skipped, set.Problems)
	}
	recs := make([]train.Record, len(set.Records))
	for i, rec := range set.Records {
		recs[i] = train.Record{Text: rec.Text, Label: rec.Labels[0]}
	}
	say := func(msg string) { fmt.Fprintf(os.Stderr, "gen: %s\n", msg) }
	start := time.Now()
	m, sum, err := r.Fit(context.Background(), recs, nil, train.Progress{Warn: say, Info: say})
	if err != nil {
		return err
	}
	fmt.Fprintf(os.Stderr, "gen: trained in %s: dev accuracy %.4f (epoch %d of %d), naive Bayes %.4f\n",
		time.Since(start).Round(100*time.Millisecond), sum.Network.DevAccuracy, sum.BestEpoch, sum.EpochsRun, sum.Baseline.DevAccuracy)
	for _, f := range files {
		sum.Files = append(sum.Files, filepath.Base(f))
	}
	sum.Records["skipped"], sum.Records["multi_label"] = set.Skipped, set.Multi
	if err := sum.Store(m); err != nil {
		return err
	}
	if err := m.Save(out+".tmp", model.SaveOptions{}); err != nil {
		return err
	}
	st, err := os.Stat(out + ".tmp")
	if err != nil {
		return err
	}
	if st.Size() > maxSize {
		os.Remove(out + ".tmp")
		return fmt.Errorf("model is %d bytes, over the %d limit", st.Size(), maxSize)
	}
	fmt.Fprintf(os.Stderr, "gen: %s: %d bytes\n", out, st.Size())
	return os.Rename(out+".tmp", out)
}
