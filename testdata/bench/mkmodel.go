// Command mkmodel builds an untrained benchmark model: random weights over a
// given word list, folded, saved. Tagging speed does not depend on how well
// a model was trained, only on its shape, so run.sh uses this when
// `convtag train` cannot make the benchmark model. It lives under testdata/,
// outside `go build ./...`; run it by path:
//
//	go run ./testdata/bench/genlog.go -words -vocab 50000 > words.txt
//	go run ./testdata/bench/mkmodel.go -words words.txt -dim 300 -o bench.safetensors
package main

import (
	"bufio"
	"flag"
	"fmt"
	"os"
	"strconv"
	"strings"

	"convtag/model"
	"convtag/model/token"
)

func main() {
	if err := run(); err != nil {
		fmt.Fprintln(os.Stderr, "mkmodel:", err)
		os.Exit(1)
	}
}

func run() error {
	words := flag.String("words", "", "file with one word a line, most frequent first")
	out := flag.String("o", "", "model file to write")
	dim := flag.Int("dim", 300, "embedding size")
	filters := flag.Int("filters", 100, "filters per width")
	widths := flag.String("widths", "3,4,5", "window widths")
	labels := flag.String("labels", "schedule,tickets,lost-and-found,praise,spam", "tag names")
	half := flag.Bool("half", false, "store the folded tables in half precision")
	seed := flag.Uint64("seed", 1, "seed for the random weights")
	flag.Parse()
	if *words == "" || *out == "" {
		return fmt.Errorf("need -words FILE and -o FILE")
	}
	f, err := os.Open(*words)
	if err != nil {
		return err
	}
	defer f.Close()
	var list []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if w := strings.TrimSpace(sc.Text()); w != "" {
			list = append(list, w)
		}
	}
	if err := sc.Err(); err != nil {
		return fmt.Errorf("%s: %w", *words, err)
	}
	cfg := model.DefaultConfig()
	cfg.Dim, cfg.Filters, cfg.Widths = *dim, *filters, nil
	for _, s := range strings.Split(*widths, ",") {
		w, err := strconv.Atoi(s)
		if err != nil {
			return fmt.Errorf("-widths %q: %w", *widths, err)
		}
		cfg.Widths = append(cfg.Widths, w)
	}
	m, err := model.New(cfg, token.Settings{}, strings.Split(*labels, ","), list, *seed)
	if err != nil {
		return err
	}
	model.FoldModel(m, *half)
	return m.Save(*out, model.SaveOptions{})
}
