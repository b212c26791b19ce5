// Command gen builds the built-in model, default.safetensors, from the UCI
// "Sentiment Labelled Sentences" data set (Kotzias, Denil, de Freitas and
// Smyth, KDD 2015; CC BY 4.0): all 3,000 sentences of the three sources
// (amazon, imdb, yelp), tagged positive or negative. It is run by
// `go generate ./model/builtin` from that directory.
//
// It fetches the data (npm pack sentiment@5.0.2 into the git-ignored
// testdata/cache/uci) and runs the convtag train command itself, so the
// built-in model goes through exactly the code users train with. Settings,
// chosen to keep the file under 8 MB with its folded table: d = 128, widths
// 3,4,5 x 100 filters (Kim 2014), words seen at least 3 times get their own
// row (1,483 by a plain word count) and the rest share 500 buckets, the
// folded table in half precision; seed 1, -j 2, 10% held out for early
// stopping.
package main

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"time"

	"convtag/model/internal/uci"
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
	root := filepath.Dir(filepath.Dir(dir)) // testdata/cache/uci -> module root
	root = filepath.Dir(root)
	args := []string{"run", "./cmd/convtag", "train", "-o", out + ".tmp",
		"--vector-size", "128", "--widths", "3,4,5", "--filters", "100",
		"--min-seen", "3", "--unseen-rows", "500", "--fold-half",
		"--seed", "1", "-j", "2", "--dev-fraction", "0.1"}
	for _, src := range uci.Sources {
		// Relative to the module root, so that the training summary in the
		// file names the same paths on every machine.
		rel, err := filepath.Rel(root, uci.JSONLPath(dir, src))
		if err != nil {
			return err
		}
		args = append(args, rel)
	}
	cmd := exec.Command("go", args...)
	cmd.Dir = root
	cmd.Stdout, cmd.Stderr = os.Stdout, os.Stderr
	start := time.Now()
	if err := cmd.Run(); err != nil {
		return fmt.Errorf("convtag train: %w", err)
	}
	fmt.Fprintf(os.Stderr, "gen: trained in %s (wall time, including go run's build)\n", time.Since(start).Round(100*time.Millisecond))
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
