package uci

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
)

// Package is the npm package that carries the data.
const Package = "sentiment@5.0.2"

// Sources are the three review sources, in the order Fetch returns them.
var Sources = []string{"amazon", "imdb", "yelp"}

// sums are the SHA-256 of the fixture files as published in sentiment@5.0.2
// (measured on first fetch), so a changed download is noticed.
var sums = map[string]string{
	"amazon": "bc5eb0cac49fc45987301f1dc2d02cf5ca356ba6c882be179dce77d74e666ed9",
	"imdb":   "44a7b9082ed732ee2de3c858ea5ee2e99aca34f239a1c4359d3a300bf099bdb5",
	"yelp":   "9f3f47983f21eeb819380767b74bfa648eca208f156241111454b3e122773ff7",
}

// Sentence is one labelled sentence.
type Sentence struct {
	Text   string `json:"text"`
	Label  string `json:"label"` // "positive" or "negative"
	Source string `json:"source"`
}

// ErrNoNpm means npm is not installed, so the data cannot be fetched.
var ErrNoNpm = errors.New("uci: npm not found")

// CacheDir returns testdata/cache/uci under the module root found by
// walking up from the working directory to go.mod.
func CacheDir() (string, error) {
	dir, err := os.Getwd()
	if err != nil {
		return "", err
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return filepath.Join(dir, "testdata", "cache", "uci"), nil
		}
		up := filepath.Dir(dir)
		if up == dir {
			return "", errors.New("uci: go.mod not found above the working directory")
		}
		dir = up
	}
}

// JSONLPath is where Fetch writes source's sentences as JSON Lines.
func JSONLPath(dir, source string) string { return filepath.Join(dir, source+".jsonl") }

// Fetch returns the 3,000 sentences, fetching and extracting them into dir
// first when they are not there yet.
func Fetch(dir string) ([]Sentence, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	tgz := filepath.Join(dir, "sentiment-5.0.2.tgz")
	if _, err := os.Stat(tgz); err != nil {
		if _, err := exec.LookPath("npm"); err != nil {
			return nil, ErrNoNpm
		}
		cmd := exec.Command("npm", "pack", Package, "--pack-destination", dir)
		cmd.Dir = dir
		if out, err := cmd.CombinedOutput(); err != nil {
			return nil, fmt.Errorf("uci: npm pack %s: %w: %s", Package, err, bytes.TrimSpace(out))
		}
	}
	files, err := extract(tgz)
	if err != nil {
		return nil, err
	}
	var all []Sentence
	for _, src := range Sources {
		b := files[src]
		sum := sha256.Sum256(b)
		if hex.EncodeToString(sum[:]) != sums[src] {
			return nil, fmt.Errorf("uci: %s.json: unexpected SHA-256 %x", src, sum)
		}
		var raw []struct {
			Text  string `json:"text"`
			Class *int   `json:"class"`
		}
		if err := json.Unmarshal(b, &raw); err != nil {
			return nil, fmt.Errorf("uci: %s.json: %w", src, err)
		}
		var out bytes.Buffer
		for _, r := range raw {
			if r.Class == nil || r.Text == "" {
				continue // the trailing empty entry
			}
			s := Sentence{Text: r.Text, Label: "negative", Source: src}
			if *r.Class == 1 {
				s.Label = "positive"
			}
			all = append(all, s)
			line, _ := json.Marshal(s)
			out.Write(line)
			out.WriteByte('\n')
		}
		if err := os.WriteFile(JSONLPath(dir, src), out.Bytes(), 0o644); err != nil {
			return nil, err
		}
	}
	if len(all) != 3000 {
		return nil, fmt.Errorf("uci: %d sentences, want 3000", len(all))
	}
	return all, nil
}

func extract(tgz string) (map[string][]byte, error) {
	f, err := os.Open(tgz)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		return nil, fmt.Errorf("uci: %s: %w", tgz, err)
	}
	tr := tar.NewReader(zr)
	files := map[string][]byte{}
	for {
		h, err := tr.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("uci: %s: %w", tgz, err)
		}
		for _, src := range Sources {
			if h.Name == "package/test/fixtures/"+src+".json" {
				b, err := io.ReadAll(io.LimitReader(tr, 1<<24))
				if err != nil {
					return nil, err
				}
				files[src] = b
			}
		}
	}
	for _, src := range Sources {
		if files[src] == nil {
			return nil, fmt.Errorf("uci: %s: test/fixtures/%s.json missing", tgz, src)
		}
	}
	return files, nil
}
