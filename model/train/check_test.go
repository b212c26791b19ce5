package train

import (
	"context"
	"errors"
	"math"
	"regexp"
	"strings"
	"testing"
)

// TestRecipeCheck: the defaults pass; each bad value gives ErrRecipe with
// a message naming the value's flag; every flag a message names is one
// FlagSet registers, so the names cannot drift apart.
func TestRecipeCheck(t *testing.T) {
	if err := Defaults().Check(); err != nil {
		t.Fatalf("Defaults: %v", err)
	}
	ok := Defaults()
	ok.Optimizer, ok.ClassWeights, ok.LR, ok.DevFraction, ok.Patience, ok.Jobs = "", "", 0, 0, 0, 0
	if err := ok.Check(); err != nil {
		t.Errorf("zero optimizer, class weights, rate, dev share, patience, jobs: %v", err)
	}
	for _, c := range []struct {
		name string
		edit func(*Recipe)
		want string
	}{
		{"dim", func(r *Recipe) { r.Dim = 0 }, "network shape: dim 0"},
		{"widths", func(r *Recipe) { r.Widths = nil }, "network shape: widths"},
		{"width", func(r *Recipe) { r.Widths = []int{3, 17} }, "network shape: widths: 17"},
		{"filters", func(r *Recipe) { r.Filters = -1 }, "network shape: filters -1"},
		{"hidden", func(r *Recipe) { r.Hidden = -2 }, "network shape: hidden -2"},
		{"buckets", func(r *Recipe) { r.Buckets = 0 }, "network shape: buckets 0"},
		{"epochs", func(r *Recipe) { r.Epochs = 0 }, "--epochs 0: must be at least 1"},
		{"batch", func(r *Recipe) { r.Batch = -3 }, "--batch -3"},
		{"patience", func(r *Recipe) { r.Patience = -1 }, "--patience -1"},
		{"jobs", func(r *Recipe) { r.Jobs = -1 }, "--jobs -1"},
		{"min-seen", func(r *Recipe) { r.MinSeen = 0 }, "--min-seen 0"},
		{"max-words", func(r *Recipe) { r.MaxWords = -1 }, "--max-words -1"},
		{"optimizer", func(r *Recipe) { r.Optimizer = "sgd" }, `--optimizer "sgd": want adadelta or adam`},
		{"rate NaN", func(r *Recipe) { r.LR = math.NaN() }, "--learning-rate NaN"},
		{"rate infinite", func(r *Recipe) { r.LR = math.Inf(1) }, "--learning-rate +Inf"},
		{"rate negative", func(r *Recipe) { r.LR = -0.5 }, "--learning-rate -0.5"},
		{"class weights", func(r *Recipe) { r.ClassWeights = "heavy" }, `--class-weights "heavy"`},
		{"dev share 1", func(r *Recipe) { r.DevFraction = 1 }, "--dev-fraction 1"},
		{"dev share negative", func(r *Recipe) { r.DevFraction = -0.1 }, "--dev-fraction -0.1"},
		{"dev share NaN", func(r *Recipe) { r.DevFraction = math.NaN() }, "--dev-fraction NaN"},
	} {
		t.Run(c.name, func(t *testing.T) {
			r := Defaults()
			c.edit(&r)
			err := r.Check()
			if !errors.Is(err, ErrRecipe) || !strings.HasPrefix(err.Error(), "model: bad recipe: ") || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("Check: %v, want ErrRecipe with %q", err, c.want)
			}
			fl := r.FlagSet()
			for _, m := range regexp.MustCompile(`--([a-z-]+)`).FindAllStringSubmatch(err.Error(), -1) {
				if fl.Lookup(m[1]) == nil {
					t.Errorf("message names --%s, which FlagSet does not have", m[1])
				}
			}
			// Fit checks first: it reports the recipe, not the (absent) records.
			if _, _, err := r.Fit(context.Background(), nil, nil, Progress{}); !errors.Is(err, ErrRecipe) {
				t.Errorf("Fit: %v, want ErrRecipe", err)
			}
		})
	}
}
