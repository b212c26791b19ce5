package model

import "fmt"

// FormatVersion is the model-file format written by this package and the
// only one it opens.
const FormatVersion = 1

// Defaults for a new model. The architecture (widths 3, 4, 5 with 100
// filters each) follows Kim (2014), "Convolutional Neural Networks for
// Sentence Classification", EMNLP.
const (
	DefaultDim     = 128
	DefaultFilters = 100
	DefaultBuckets = 10000
)

// DefaultWidths are the convolution window widths of a new model.
var DefaultWidths = []int{3, 4, 5}

// Config is a network's shape. The zero value is not usable; start from
// DefaultConfig.
type Config struct {
	Dim     int   `json:"dim"`     // embedding size d
	Widths  []int `json:"widths"`  // window widths, in order
	Filters int   `json:"filters"` // filters per width, F
	Hidden  int   `json:"hidden"`  // size of an optional hidden layer; 0 means none
	Buckets int   `json:"buckets"` // shared rows for unknown words, B
}

// DefaultConfig returns the default shape.
func DefaultConfig() Config {
	return Config{Dim: DefaultDim, Widths: append([]int(nil), DefaultWidths...), Filters: DefaultFilters, Buckets: DefaultBuckets}
}

// Features is the width of the pooled feature vector: one per filter.
func (c Config) Features() int { return len(c.Widths) * c.Filters }

// Taps is the sum of the widths: the number of filter taps per filter.
func (c Config) Taps() int {
	n := 0
	for _, w := range c.Widths {
		n += w
	}
	return n
}

// MaxWidth is the widest window.
func (c Config) MaxWidth() int {
	m := 0
	for _, w := range c.Widths {
		m = max(m, w)
	}
	return m
}

// Validate reports the first thing wrong with c.
func (c Config) Validate() error {
	switch {
	case c.Dim < 1 || c.Dim > 4096:
		return fmt.Errorf("dim %d out of range 1..4096", c.Dim)
	case len(c.Widths) == 0 || len(c.Widths) > 16:
		return fmt.Errorf("widths: need 1..16 window widths, have %d", len(c.Widths))
	case c.Filters < 1 || c.Filters > 4096:
		return fmt.Errorf("filters %d out of range 1..4096", c.Filters)
	case c.Hidden < 0 || c.Hidden > 4096:
		return fmt.Errorf("hidden %d out of range 0..4096", c.Hidden)
	case c.Buckets < 1 || c.Buckets > 1<<24:
		return fmt.Errorf("buckets %d out of range 1..%d", c.Buckets, 1<<24)
	}
	for _, w := range c.Widths {
		if w < 1 || w > 16 {
			return fmt.Errorf("widths: %d out of range 1..16", w)
		}
	}
	return nil
}
