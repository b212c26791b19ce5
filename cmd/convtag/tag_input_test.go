package main

import (
	"encoding/json"
	"strings"
	"testing"
)

// What tag makes of inputs that are easy to get quietly wrong: prose that
// starts with a brace, and texts in which the model's tokenizer finds no
// word. Output lines are read back with encoding/json.
func TestTagQuietWrongs(t *testing.T) {
	m := tagModel(t, t.TempDir(), "m.safetensors", []string{"crossing", "weather"}, 1)
	for _, c := range []struct {
		name  string
		in    string
		args  []string
		tag   string // "" when the record must pass unchanged
		stats []string
	}{
		{"brace prose is text", "{sigh} my ferry ticket was declined\n", []string{"--emit", "jsonl"}, "*", []string{"text lines=1", "malformed=0"}},
		{"brace prose under jsonl is a reject", "{sigh} my ferry ticket was declined\n", []string{"--format", "jsonl"}, "", []string{"text lines=0", "malformed=1"}},
		{"punctuation only", `{"text":"!!! ???"}` + "\n", nil, "unsure", []string{"no words=1"}},
		{"empty text", `{"text":""}` + "\n", []string{"--unsure-tag", "unknown"}, "unknown", []string{"no words=1", "tag unknown=1"}},
		{"text line of punctuation", "...\n", []string{"--emit", "jsonl", "--why", "2"}, "unsure", []string{"no words=1", "text lines=1"}},
		{"words", `{"text":"ferry late!"}` + "\n", nil, "*", []string{"no words=0"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := runCmd(t, c.in, append([]string{"tag", "-m", m, "--stats"}, c.args...)...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, errs)
			}
			if c.tag == "" {
				if out != c.in {
					t.Errorf("out %q, want the record unchanged", out)
				}
			} else {
				var rec map[string]any
				if err := json.Unmarshal([]byte(out), &rec); err != nil {
					t.Fatalf("out %q: %v", out, err)
				}
				tag, _ := rec["tag"].(string)
				conf, _ := rec["confidence"].(float64)
				switch {
				case c.tag == "*" && (tag == "" || tag == "unsure" || conf <= 0):
					t.Errorf("out %q: want a model tag", out)
				case c.tag != "*" && (tag != c.tag || conf != 0):
					t.Errorf("out %q: want tag %q, confidence 0", out, c.tag)
				}
				if why, ok := rec["why"]; ok && c.tag != "*" && len(why.([]any)) != 0 {
					t.Errorf("out %q: evidence for a text without words", out)
				}
			}
			got := statLines(errs)
			for _, s := range c.stats {
				name, want, _ := strings.Cut(s, "=")
				if got[name] != want {
					t.Errorf("--stats %s: %q, want %s\n%s", name, got[name], want, errs)
				}
			}
		})
	}
}

// statLines reads --stats lines ("convtag: NAME   VALUE") into a map.
func statLines(stderr string) map[string]string {
	m := map[string]string{}
	for _, l := range strings.Split(stderr, "\n") {
		l, ok := strings.CutPrefix(l, "convtag: ")
		if i := strings.LastIndex(l, " "); ok && i > 0 {
			m[strings.TrimSpace(l[:i])] = l[i+1:]
		}
	}
	return m
}

// A wrong -k is told once on stderr, naming the key and the keys the
// records have; the records pass through unchanged.
func TestTagWrongKeyWarning(t *testing.T) {
	m := tagModel(t, t.TempDir(), "m.safetensors", []string{"crossing", "weather"}, 1)
	in := `{"message":"fog","ts":1}` + "\n" + `{"message":"ferry late","ts":2,"host":"quay"}` + "\n"
	for _, c := range []struct {
		key, want string
	}{
		{"msg", `convtag: none of the 2 JSON records has text at "msg"; their keys: message, ts, host` + "\n"},
		{"message", ""},
	} {
		code, out, errs := runCmd(t, in, "tag", "-m", m, "-k", c.key)
		if code != exitOK || errs != c.want {
			t.Errorf("-k %s: exit %d, stderr %q, want %q", c.key, code, errs, c.want)
		}
		if c.want != "" && out != in {
			t.Errorf("-k %s: out %q, want the records unchanged", c.key, out)
		}
	}
}
