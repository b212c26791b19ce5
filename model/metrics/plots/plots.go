package plots

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"convtag/model/metrics"
)

// Sizes of the figures.
const (
	width  = 16 * vg.Centimeter
	height = 12 * vg.Centimeter
)

// ErrNoData is returned for a figure with nothing to draw.
var ErrNoData = errors.New("plots: nothing to draw")

// series colours: a qualitative palette that stays apart in print and for
// the common colour-vision deficiencies (Okabe and Ito, "Color Universal
// Design", 2008).
var series = []color.Color{
	color.RGBA{0, 114, 178, 255},   // blue
	color.RGBA{213, 94, 0, 255},    // vermillion
	color.RGBA{0, 158, 115, 255},   // bluish green
	color.RGBA{204, 121, 167, 255}, // reddish purple
	color.RGBA{230, 159, 0, 255},   // orange
	color.RGBA{86, 180, 233, 255},  // sky blue
	color.RGBA{240, 228, 66, 255},  // yellow
	color.RGBA{0, 0, 0, 255},       // black
}

func seriesColor(i int) color.Color { return series[i%len(series)] }

func save(p *plot.Plot, w, h vg.Length, path string) error {
	format := strings.TrimPrefix(strings.ToLower(filepath.Ext(path)), ".")
	wt, err := p.WriterTo(w, h, format)
	if err != nil {
		return fmt.Errorf("plots: write %s: %w", path, err)
	}
	return writeFile(path, func(f io.Writer) error { _, err := wt.WriteTo(f); return err })
}

// saveLegendBelow writes p with the legend leg in a strip under the plot,
// where it cannot hide a curve: w × h is the plot's own area.
func saveLegendBelow(p *plot.Plot, leg *legend, w, h vg.Length, path string) error {
	n := len(leg.names)
	strip := vg.Length(n)*vg.Points(10.5) + vg.Points(14)
	format := strings.TrimPrefix(strings.ToLower(filepath.Ext(path)), ".")
	c, err := draw.NewFormattedCanvas(w, h+strip, format)
	if err != nil {
		return fmt.Errorf("plots: write %s: %w", path, err)
	}
	dc := draw.New(c)
	p.Draw(draw.Crop(dc, 0, 0, strip, 0))
	leg.Top, leg.Left = true, true
	leg.Draw(draw.Crop(dc, 2*vg.Centimeter, 0, 0, -h))
	return writeFile(path, func(f io.Writer) error { _, err := c.WriteTo(f); return err })
}

// wrapOutput is what a figure's bytes go through on the way to its
// temporary file; tests make it fail, as a full disk would.
var wrapOutput = func(w io.Writer) io.Writer { return w }

// writeFile writes a figure to path through a temporary file in the same
// directory, renamed over path only once every byte is written and the
// file closed: a failed write (a full disk) leaves neither a partial
// figure nor the temporary file, and an older figure at path stays whole.
func writeFile(path string, write func(io.Writer) error) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".*.tmp")
	if err != nil {
		return fmt.Errorf("plots: write %s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
			err = fmt.Errorf("plots: write %s: %w", path, err)
		}
	}()
	bw := bufio.NewWriter(wrapOutput(f))
	if err = write(bw); err != nil {
		return err
	}
	if err = bw.Flush(); err != nil {
		return err
	}
	if err = f.Chmod(0o644); err != nil {
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}

// legend is a plot.Legend with its entry names remembered, since
// plot.Legend does not expose them.
type legend struct {
	plot.Legend
	names []string
}

func newLegend() *legend {
	l := &legend{Legend: plot.NewLegend()}
	l.TextStyle.Font.Size = vg.Points(10)
	return l
}

func (l *legend) Add(name string, th ...plot.Thumbnailer) {
	l.names = append(l.names, name)
	l.Legend.Add(name, th...)
}

// labelTicks are tick marks at 0..n-1 named by name(i).
func labelTicks(n int, name func(int) string) plot.ConstantTicks {
	t := make(plot.ConstantTicks, n)
	for i := range t {
		t[i] = plot.Tick{Value: float64(i), Label: name(i)}
	}
	return t
}

// grid is a confusion matrix as a heat map: column c is the predicted
// label, row r counts from the bottom, so true label 0 is the top row.
// Values are the row's share (recall-style), so that a small label's
// errors show as clearly as a large one's.
type grid struct{ m [][]int }

func (g grid) Dims() (c, r int) { return len(g.m), len(g.m) }
func (g grid) X(c int) float64  { return float64(c) }
func (g grid) Y(r int) float64  { return float64(r) }
func (g grid) Z(c, r int) float64 {
	row := g.m[len(g.m)-1-r]
	n := 0
	for _, v := range row {
		n += v
	}
	if n == 0 {
		return 0
	}
	return float64(row[c]) / float64(n)
}
func (g grid) Min() float64 { return 0 }
func (g grid) Max() float64 { return 1 }

// ramp is a sequential palette from white to dark blue.
type ramp int

func (r ramp) Colors() []color.Color {
	out := make([]color.Color, int(r))
	for i := range out {
		t := float64(i) / float64(len(out)-1)
		mix := func(a, b float64) uint8 { return uint8(math.Round(a + (b-a)*t)) }
		out[i] = color.RGBA{mix(255, 8), mix(255, 48), mix(255, 107), 255}
	}
	return out
}

// Confusion draws the confusion matrix conf (rows true labels, columns
// predicted, as metrics.Confusion) as a heat map coloured by each row's
// share, with the counts written in the cells, to path.
func Confusion(path, title string, labels []string, conf [][]int) error {
	k := len(conf)
	if k == 0 || len(labels) != k {
		return ErrNoData
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "predicted label"
	p.Y.Label.Text = "true label"
	hm := plotter.NewHeatMap(grid{conf}, ramp(64))
	p.Add(hm)
	var xys plotter.XYs
	var names []string
	for r := range k {
		for c := range k {
			xys = append(xys, plotter.XY{X: float64(c), Y: float64(k - 1 - r)})
			names = append(names, strconv.Itoa(conf[r][c]))
		}
	}
	lab, err := plotter.NewLabels(plotter.XYLabels{XYs: xys, Labels: names})
	if err != nil {
		return fmt.Errorf("plots: %w", err)
	}
	g := grid{conf}
	for i := range lab.TextStyle {
		st := lab.TextStyle[i]
		st.XAlign, st.YAlign = draw.XCenter, draw.YCenter
		st.Color = color.Black
		if g.Z(int(xys[i].X), int(xys[i].Y)) > 0.55 {
			st.Color = color.White
		}
		lab.TextStyle[i] = st
	}
	p.Add(lab)
	p.X.Tick.Marker = labelTicks(k, func(i int) string { return labels[i] })
	p.Y.Tick.Marker = labelTicks(k, func(i int) string { return labels[k-1-i] })
	if k > 3 {
		p.X.Tick.Label.Rotation = math.Pi / 6
		p.X.Tick.Label.XAlign = draw.XRight
		p.X.Tick.Label.YAlign = draw.YCenter
	}
	p.X.Min, p.X.Max = -0.5, float64(k)-0.5
	p.Y.Min, p.Y.Max = -0.5, float64(k)-0.5
	side := max(10*vg.Centimeter, vg.Length(k)*2*vg.Centimeter+4*vg.Centimeter)
	return save(p, side+2*vg.Centimeter, side, path)
}

func rect(x0, y0, x1, y1 float64) plotter.XYs {
	return plotter.XYs{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}}
}

// Reliability draws the reliability diagram of cal: for each confidence
// bin a bar of its accuracy, a line at its mean confidence, the gap between
// them shaded, and the
// diagonal of perfect calibration, with the ECE in the title.
func Reliability(path, title string, cal metrics.Calibration) error {
	if len(cal.Bins) == 0 {
		return ErrNoData
	}
	p := plot.New()
	p.Title.Text = fmt.Sprintf("%s (ECE %.3f)", title, cal.ECE)
	p.X.Label.Text = "confidence"
	p.Y.Label.Text = "accuracy"
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	var accBar, gapBar *plotter.Polygon
	var meanLine *plotter.Line
	leg := newLegend()
	for _, b := range cal.Bins {
		if b.Count == 0 {
			continue
		}
		acc, conf := float64(b.Accuracy), float64(b.Confidence)
		bar, err := plotter.NewPolygon(rect(b.Lo, 0, b.Hi, acc))
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		bar.Color = color.RGBA{0, 114, 178, 255}
		bar.LineStyle.Color = color.White
		gap, err := plotter.NewPolygon(rect(b.Lo, min(acc, conf), b.Hi, max(acc, conf)))
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		gap.Color = color.NRGBA{213, 94, 0, 80}
		gap.LineStyle.Color = color.RGBA{213, 94, 0, 255}
		mean, err := plotter.NewLine(plotter.XYs{{X: b.Lo, Y: conf}, {X: b.Hi, Y: conf}})
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		mean.Width = vg.Points(2)
		p.Add(bar, gap, mean)
		accBar, gapBar, meanLine = bar, gap, mean
		lab, err := plotter.NewLabels(plotter.XYLabels{
			XYs:    plotter.XYs{{X: (b.Lo + b.Hi) / 2, Y: min(acc+0.02, 0.97)}},
			Labels: []string{strconv.Itoa(b.Count)},
		})
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		lab.TextStyle[0].XAlign = draw.XCenter
		lab.TextStyle[0].Font.Size = vg.Points(7)
		p.Add(lab)
	}
	diag, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: 1, Y: 1}})
	if err != nil {
		return fmt.Errorf("plots: %w", err)
	}
	diag.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	diag.Color = color.Gray{90}
	p.Add(diag)
	if accBar != nil {
		leg.Add("accuracy of the bin's records (their number above the bar)", accBar)
		leg.Add("the bin's mean confidence", meanLine)
		leg.Add("gap between the two", gapBar)
	}
	leg.Add("perfect calibration", diag)
	p.X.Tick.Marker = plot.ConstantTicks(tenths())
	p.Y.Tick.Marker = plot.ConstantTicks(tenths())
	return saveLegendBelow(p, leg, height, height, path)
}

func tenths() []plot.Tick {
	var t []plot.Tick
	for i := 0; i <= 10; i++ {
		v := float64(i) / 10
		lab := ""
		if i%2 == 0 {
			lab = strconv.FormatFloat(v, 'f', 1, 64)
		}
		t = append(t, plot.Tick{Value: v, Label: lab})
	}
	return t
}

// Curve is one label's precision-recall curve.
type Curve struct {
	Label            string
	Points           []metrics.PRPoint
	AveragePrecision metrics.Fraction
}

// PR draws one precision-recall curve per label (skipping labels without
// points or without support) in one figure, each named with its average
// precision. The curves are step functions from the highest threshold down,
// starting at recall 0.
func PR(path, title string, curves []Curve) error {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "recall"
	p.Y.Label.Text = "precision"
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1.02
	leg := newLegend()
	drawn := 0
	for i, c := range curves {
		if len(c.Points) == 0 || !c.AveragePrecision.Defined() {
			continue
		}
		xys := plotter.XYs{{X: 0, Y: c.Points[0].Precision}}
		for _, pt := range c.Points {
			last := xys[len(xys)-1]
			xys = append(xys, plotter.XY{X: pt.Recall, Y: last.Y}, plotter.XY{X: pt.Recall, Y: pt.Precision})
		}
		l, err := plotter.NewLine(xys)
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		l.Color = seriesColor(i)
		l.Width = vg.Points(1.5)
		if i >= len(series) {
			l.Dashes = []vg.Length{vg.Points(5), vg.Points(2)}
		}
		p.Add(l)
		leg.Add(fmt.Sprintf("%s (average precision %.3f)", c.Label, float64(c.AveragePrecision)), l)
		drawn++
	}
	if drawn == 0 {
		return ErrNoData
	}
	p.X.Tick.Marker = plot.ConstantTicks(tenths())
	p.Y.Tick.Marker = plot.ConstantTicks(tenths())
	return saveLegendBelow(p, leg, width, height, path)
}

// Epoch is one epoch of a training run, as the training summary stores it.
type Epoch struct {
	Epoch      int     `json:"epoch"`
	Loss       float64 `json:"loss"`
	TrainAcc   float64 `json:"train_accuracy"`
	DevAcc     float64 `json:"dev_accuracy"`
	DevMacroF1 float64 `json:"dev_macro_f1"`
}

// History is a training run's learning curve.
type History struct {
	Epochs    []Epoch `json:"curve"`
	BestEpoch int     `json:"best_epoch"`
	// BaselineDevAcc is the baseline's dev accuracy, drawn as a level
	// line; 0 means none.
	BaselineDevAcc float64 `json:"-"`
}

// ParseHistory finds the learning curve in a training summary: the first
// object, searched breadth first from the top, with a "curve" array of
// epochs, and its "best_epoch". It is an error when there is none.
func ParseHistory(summary []byte) (*History, error) {
	var top any
	if err := json.Unmarshal(summary, &top); err != nil {
		return nil, fmt.Errorf("plots: training summary: %w", err)
	}
	queue := []any{top}
	for len(queue) > 0 {
		v := queue[0]
		queue = queue[1:]
		switch v := v.(type) {
		case map[string]any:
			if c, ok := v["curve"].([]any); ok && len(c) > 0 {
				b, _ := json.Marshal(v)
				var h History
				if err := json.Unmarshal(b, &h); err != nil {
					return nil, fmt.Errorf("plots: training summary curve: %w", err)
				}
				return &h, nil
			}
			for _, x := range v {
				queue = append(queue, x)
			}
		case []any:
			queue = append(queue, v...)
		}
	}
	return nil, fmt.Errorf("plots: training summary: %w: no learning curve", ErrNoData)
}

// Learning draws the learning curve: training loss on the left axis's
// scale (normalised to its first epoch), training and dev accuracy and dev
// macro-F1 per epoch, the best epoch marked, and the baseline's dev
// accuracy when known.
func Learning(path, title string, h *History) error {
	if h == nil || len(h.Epochs) == 0 {
		return ErrNoData
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "epoch"
	p.Y.Label.Text = "accuracy, macro-F1; loss relative to epoch 1"
	var loss, tr, dev, f1 plotter.XYs
	leg := newLegend()
	l0 := h.Epochs[0].Loss
	for _, e := range h.Epochs {
		x := float64(e.Epoch)
		if l0 > 0 {
			loss = append(loss, plotter.XY{X: x, Y: e.Loss / l0})
		}
		tr = append(tr, plotter.XY{X: x, Y: e.TrainAcc})
		dev = append(dev, plotter.XY{X: x, Y: e.DevAcc})
		f1 = append(f1, plotter.XY{X: x, Y: e.DevMacroF1})
	}
	add := func(name string, xys plotter.XYs, i int, dashed bool) error {
		if len(xys) == 0 {
			return nil
		}
		l, pts, err := plotter.NewLinePoints(xys)
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		l.Color, pts.Color = seriesColor(i), seriesColor(i)
		l.Width = vg.Points(1.5)
		pts.Radius = vg.Points(2)
		if dashed {
			l.Dashes = []vg.Length{vg.Points(4), vg.Points(2)}
		}
		p.Add(l, pts)
		leg.Add(name, l, pts)
		return nil
	}
	for i, s := range []struct {
		name   string
		xys    plotter.XYs
		dashed bool
	}{
		{"training loss, as a share of the first epoch's", loss, true},
		{"training accuracy (with dropout)", tr, false},
		{"dev accuracy", dev, false},
		{"dev macro-F1", f1, false},
	} {
		if err := add(s.name, s.xys, i, s.dashed); err != nil {
			return err
		}
	}
	last := float64(h.Epochs[len(h.Epochs)-1].Epoch)
	if h.BaselineDevAcc > 0 {
		b, err := plotter.NewLine(plotter.XYs{{X: 1, Y: h.BaselineDevAcc}, {X: last, Y: h.BaselineDevAcc}})
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		b.Color = color.Gray{100}
		b.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
		p.Add(b)
		leg.Add(fmt.Sprintf("baseline's dev accuracy (%.3f)", h.BaselineDevAcc), b)
	}
	if h.BestEpoch > 0 {
		m, err := plotter.NewLine(plotter.XYs{{X: float64(h.BestEpoch), Y: 0}, {X: float64(h.BestEpoch), Y: 1}})
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		m.Color = color.Gray{160}
		p.Add(m)
		leg.Add(fmt.Sprintf("best epoch (%d), the one kept", h.BestEpoch), m)
	}
	p.Y.Min = 0
	p.Y.Max = math.Max(1, p.Y.Max)
	p.X.Min, p.X.Max = 1, math.Max(2, last)
	p.Add(plotter.NewGrid())
	if last <= 30 {
		p.X.Tick.Marker = labelTicksFrom(1, int(last))
	}
	return saveLegendBelow(p, leg, width, height, path)
}

func labelTicksFrom(lo, hi int) plot.ConstantTicks {
	var t plot.ConstantTicks
	step := 1
	if hi-lo > 15 {
		step = 5
	}
	for i := lo; i <= hi; i++ {
		lab := ""
		if i == lo || i%step == 0 {
			lab = strconv.Itoa(i)
		}
		t = append(t, plot.Tick{Value: float64(i), Label: lab})
	}
	return t
}

// Set is what WriteAll draws. Curves and History may be empty.
type Set struct {
	Title   string // prefix of every figure's title, such as the model name
	Report  *metrics.Report
	Curves  []Curve
	History *History
}

// WriteAll writes confusion, reliability, pr (and learning, when s has a
// history) into dir (created if missing) with the extension ext ("png" or
// "svg") and returns the paths written.
func WriteAll(dir, ext string, s Set) ([]string, error) {
	ext = strings.TrimPrefix(strings.ToLower(ext), ".")
	if ext != "png" && ext != "svg" {
		return nil, fmt.Errorf("plots: unknown image format %q (want png or svg)", ext)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("plots: %w", err)
	}
	title := func(t string) string {
		if s.Title == "" {
			return t
		}
		return s.Title + ": " + t
	}
	var files []string
	do := func(name string, f func(path string) error) error {
		path := filepath.Join(dir, name+"."+ext)
		if err := f(path); err != nil {
			return err
		}
		files = append(files, path)
		return nil
	}
	r := s.Report
	if err := do("confusion", func(p string) error { return Confusion(p, title("confusion matrix"), r.Labels, r.Confusion) }); err != nil {
		return files, err
	}
	if err := do("reliability", func(p string) error { return Reliability(p, title("reliability"), r.Calibration) }); err != nil {
		return files, err
	}
	if len(s.Curves) > 0 {
		if err := do("precision-recall", func(p string) error { return PR(p, title("precision-recall per label"), s.Curves) }); err != nil && !errors.Is(err, ErrNoData) {
			return files, err
		}
	}
	if s.History != nil && len(s.History.Epochs) > 0 {
		if err := do("learning-curve", func(p string) error { return Learning(p, title("learning curve"), s.History) }); err != nil {
			return files, err
		}
	}
	return files, nil
}
