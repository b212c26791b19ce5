package plots

import (
	"bytes"
	"encoding/xml"
	"errors"
	"flag"
	"image"
	"image/png"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"convtag/model/metrics"
)

var keep = flag.String("keep", "", "also write the figures into this directory, to look at them")

// sample is a seeded evaluation set: probabilities lean towards the true
// label, the last label is rare.
func sample() ([]string, []int, [][]float32) {
	labels := []string{"schedule", "tickets", "lost-and-found", "praise", "spam"}
	rng := rand.New(rand.NewPCG(5, 5))
	var gold []int
	var probs [][]float32
	for range 400 {
		g := rng.IntN(len(labels))
		if g == len(labels)-1 && rng.IntN(3) > 0 {
			g = 0
		}
		row := make([]float32, len(labels))
		var sum float32
		for j := range row {
			row[j] = float32(rng.ExpFloat64())
			if j == g {
				row[j] += float32(3 * rng.Float64())
			}
			sum += row[j]
		}
		for j := range row {
			row[j] /= sum
		}
		gold = append(gold, g)
		probs = append(probs, row)
	}
	return labels, gold, probs
}

// summary is a training summary of the shape train.Train's result takes
// (a "curve" of epochs and a "best_epoch"), nested as a command may store it.
const summary = `{"data_sha256":"x","network":{"curve":[
 {"epoch":1,"loss":1.52,"train_accuracy":0.35,"dev_accuracy":0.52,"dev_macro_f1":0.41,"tokens":9000,"seconds":1.1},
 {"epoch":2,"loss":1.05,"train_accuracy":0.61,"dev_accuracy":0.70,"dev_macro_f1":0.66,"tokens":9000,"seconds":2.2},
 {"epoch":3,"loss":0.71,"train_accuracy":0.78,"dev_accuracy":0.79,"dev_macro_f1":0.76,"tokens":9000,"seconds":3.3},
 {"epoch":4,"loss":0.52,"train_accuracy":0.85,"dev_accuracy":0.82,"dev_macro_f1":0.80,"tokens":9000,"seconds":4.4},
 {"epoch":5,"loss":0.41,"train_accuracy":0.89,"dev_accuracy":0.81,"dev_macro_f1":0.80,"tokens":9000,"seconds":5.5}],
 "best_epoch":4,"epochs_run":5}}`

func set(t *testing.T) Set {
	labels, gold, probs := sample()
	r, err := metrics.Evaluate(labels, gold, probs, metrics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var curves []Curve
	for c, l := range labels {
		pts, ap, err := metrics.PRCurve(gold, probs, c)
		if err != nil {
			t.Fatal(err)
		}
		curves = append(curves, Curve{Label: l, Points: pts, AveragePrecision: ap})
	}
	h, err := ParseHistory([]byte(summary))
	if err != nil {
		t.Fatal(err)
	}
	h.BaselineDevAcc = 0.77
	return Set{Title: "demo", Report: r, Curves: curves, History: h}
}

func TestParseHistory(t *testing.T) {
	h, err := ParseHistory([]byte(summary))
	if err != nil {
		t.Fatal(err)
	}
	if len(h.Epochs) != 5 || h.BestEpoch != 4 || h.Epochs[2].DevAcc != 0.79 || h.Epochs[4].Loss != 0.41 {
		t.Errorf("history = %+v", h)
	}
	for _, bad := range []string{`{}`, `{"curve":[]}`, `not json`, `{"curve":[{"epoch":"one"}]}`} {
		if _, err := ParseHistory([]byte(bad)); err == nil {
			t.Errorf("%s: no error", bad)
		}
	}
}

// TestPNG writes every figure as PNG and checks that each decodes with
// image/png to a plausible size with more than a few colours (a blank or
// one-colour image would mean nothing was drawn).
func TestPNG(t *testing.T) {
	dir := t.TempDir()
	if *keep != "" {
		dir = *keep
	}
	files, err := WriteAll(dir, "png", set(t))
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"confusion.png", "reliability.png", "precision-recall.png", "learning-curve.png"}
	if len(files) != len(want) {
		t.Fatalf("wrote %v, want %v", files, want)
	}
	for i, f := range files {
		if filepath.Base(f) != want[i] {
			t.Errorf("file %d = %s, want %s", i, f, want[i])
		}
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		cfg, format, err := image.DecodeConfig(bytes.NewReader(b))
		if err != nil || format != "png" {
			t.Fatalf("%s: %v (format %q)", f, err, format)
		}
		if cfg.Width < 200 || cfg.Height < 200 {
			t.Errorf("%s: %dx%d", f, cfg.Width, cfg.Height)
		}
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		colours := map[[4]uint32]bool{}
		bd := img.Bounds()
		for y := bd.Min.Y; y < bd.Max.Y; y += 3 {
			for x := bd.Min.X; x < bd.Max.X; x += 3 {
				r, g, b, a := img.At(x, y).RGBA()
				colours[[4]uint32{r, g, b, a}] = true
			}
		}
		if len(colours) < 8 {
			t.Errorf("%s: only %d colours", f, len(colours))
		}
	}
}

func TestSVG(t *testing.T) {
	files, err := WriteAll(t.TempDir(), "svg", set(t))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		d := xml.NewDecoder(bytes.NewReader(b))
		root := ""
		for root == "" {
			tok, err := d.Token()
			if err != nil {
				t.Fatalf("%s: %v", f, err)
			}
			if se, ok := tok.(xml.StartElement); ok {
				root = se.Name.Local
			}
		}
		if root != "svg" {
			t.Errorf("%s: root element %q", f, root)
		}
	}
}

func TestNoData(t *testing.T) {
	dir := t.TempDir()
	for name, err := range map[string]error{
		"confusion": Confusion(filepath.Join(dir, "c.png"), "", nil, nil),
		"pr":        PR(filepath.Join(dir, "p.png"), "", nil),
		"learning":  Learning(filepath.Join(dir, "l.png"), "", &History{}),
		"calib":     Reliability(filepath.Join(dir, "r.png"), "", metrics.Calibration{}),
	} {
		if !errors.Is(err, ErrNoData) {
			t.Errorf("%s: %v, want ErrNoData", name, err)
		}
	}
	if _, err := WriteAll(dir, "gif", set(t)); err == nil {
		t.Error("gif: no error")
	}
}
