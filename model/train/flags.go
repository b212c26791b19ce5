package train

import (
	"github.com/spf13/pflag"
)

// FlagSet returns the command-line flags of the recipe's settings, bound to
// r's fields and with r's values as their defaults: the flags of
// `convtag train` that are the recipe's, which `convtag eval --folds` takes
// as well, so that both run the same recipe from the same flags. The
// caller adds it to its own set (pflag.FlagSet.AddFlagSet) and may keep it
// to tell the recipe's flags from its own.
func (r *Recipe) FlagSet() *pflag.FlagSet {
	fl := pflag.NewFlagSet("recipe", pflag.ContinueOnError)
	fl.Float64Var(&r.DevFraction, "dev-fraction", r.DevFraction, "share of each tag's records held out when there is no --dev")
	fl.IntVar(&r.Dim, "vector-size", r.Dim, "embedding size (with --vectors, the vectors' own size unless given)")
	fl.IntSliceVar(&r.Widths, "widths", r.Widths, "convolution window widths, in words")
	fl.IntVar(&r.Filters, "filters", r.Filters, "filters per width")
	fl.IntVar(&r.Hidden, "hidden", r.Hidden, "size of a ReLU hidden layer before the output; 0 for none")
	fl.IntVar(&r.Epochs, "epochs", r.Epochs, "most epochs")
	fl.IntVar(&r.Patience, "patience", r.Patience, "stop after this many epochs without a better dev accuracy; 0 never stops early")
	fl.IntVar(&r.Batch, "batch", r.Batch, "mini-batch size")
	fl.Uint64Var(&r.Seed, "seed", r.Seed, "seed for initialisation, the dev split, shuffling and dropout")
	fl.IntVarP(&r.Jobs, "jobs", "j", r.Jobs, "worker threads (default: all cores); the model depends on it")
	fl.StringVar(&r.Optimizer, "optimizer", r.Optimizer, OptAdadelta+" or "+OptAdam)
	fl.Float64Var(&r.LR, "learning-rate", r.LR, "learning rate (default: 1 for adadelta, 0.001 for adam)")
	fl.IntVar(&r.MinSeen, "min-seen", r.MinSeen, "words seen fewer times have no row of their own and share the --unseen-rows")
	fl.IntVar(&r.MaxWords, "max-words", r.MaxWords, "keep at most this many words, most frequent first; 0 for all")
	fl.IntVar(&r.Buckets, "unseen-rows", r.Buckets, "rows shared, by a hash of the word, among words with no row of their own")
	fl.StringVar(&r.ClassWeights, "class-weights", r.ClassWeights, ClassWeightsNone+", or "+ClassWeightsBalanced+" to weight each tag's loss by n/(tags*n_tag)")
	fl.BoolVar(&r.MixBaseline, "mix-baseline", r.MixBaseline, "also fit a logistic-regression baseline on tf-idf word pairs and tag with the mix of it and the network that does best on the dev records")
	return fl
}
