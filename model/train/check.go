package train

import (
	"errors"
	"fmt"
	"math"
)

// ErrRecipe is Check's error for a recipe value Fit cannot run with.
var ErrRecipe = errors.New("model: bad recipe")

// Check reports the first of r's values that Fit cannot run with, naming it
// by its flag in FlagSet (how users of train and eval --folds set it) and
// saying what it must be; nil when every value is usable. It reads no
// records, so a command calls it before reading any, and Fit calls it
// first. It checks the network shape (r.Config(), model.Config.Validate),
// Epochs and Batch at least 1, Patience, Jobs and MaxWords at least 0,
// MinSeen at least 1, the optimizer ("" is OptAdadelta), a learning rate
// that is finite and not negative (0: the optimizer's default), the class
// weights and a DevFraction in [0, 1). Errors wrap ErrRecipe.
func (r Recipe) Check() error {
	bad := func(format string, a ...any) error {
		return fmt.Errorf("%w: "+format, append([]any{ErrRecipe}, a...)...)
	}
	if err := r.Config().Validate(); err != nil {
		return bad("network shape: %v (set by --vector-size, --widths, --filters, --hidden, --unseen-rows)", err)
	}
	switch {
	case r.Epochs < 1:
		return bad("--epochs %d: must be at least 1", r.Epochs)
	case r.Batch < 1:
		return bad("--batch %d: must be at least 1", r.Batch)
	case r.Patience < 0:
		return bad("--patience %d: must be at least 0 (0 never stops early)", r.Patience)
	case r.Jobs < 0:
		return bad("--jobs %d: must be at least 0 (0 is every core)", r.Jobs)
	case r.MinSeen < 1:
		return bad("--min-seen %d: must be at least 1", r.MinSeen)
	case r.MaxWords < 0:
		return bad("--max-words %d: must be at least 0 (0 keeps every word)", r.MaxWords)
	case r.Optimizer != "" && r.Optimizer != OptAdadelta && r.Optimizer != OptAdam:
		return bad("--optimizer %q: want %s or %s", r.Optimizer, OptAdadelta, OptAdam)
	case math.IsNaN(r.LR) || math.IsInf(r.LR, 0) || r.LR < 0:
		return bad("--learning-rate %v: must be a finite number, at least 0 (0 is the optimizer's default)", r.LR)
	case r.ClassWeights != "" && r.ClassWeights != ClassWeightsNone && r.ClassWeights != ClassWeightsBalanced:
		return bad("--class-weights %q: want %s or %s", r.ClassWeights, ClassWeightsNone, ClassWeightsBalanced)
	case !(r.DevFraction >= 0 && r.DevFraction < 1):
		return bad("--dev-fraction %v: must be at least 0 and below 1", r.DevFraction)
	}
	return nil
}
