// Package uci fetches the UCI "Sentiment Labelled Sentences" data set
// (Kotzias, Denil, de Freitas and Smyth, "From Group to Individual Labels
// using Deep Features", KDD 2015; CC BY 4.0): 1,000 sentences each from
// product (amazon), movie (imdb) and restaurant (yelp) reviews, half
// positive and half negative.
//
// The npm package sentiment@5.0.2 carries it in
// test/fixtures/{amazon,imdb,yelp}.json (a JSON array of {"text", "class"}
// with class 1 positive and 0 negative, ending with one empty entry). Fetch
// gets that package with `npm pack` into a cache directory (git-ignored
// testdata/cache/uci), checks the three files' SHA-256 and writes them as
// JSON Lines with "label" positive/negative beside them. It is used by
// tests and by the built-in model's generator, never by the convtag binary.
package uci
