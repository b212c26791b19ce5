package stream

import (
	"fmt"
	"strconv"
	"strings"
	"sync/atomic"
	"unicode"
)

// keyWatchRecords is how many JSON records, from the start, are looked at
// for a wrong text key: when none of them has text at any of the keys,
// Options.Warn is told once, with the keys the records do have.
const keyWatchRecords = 1000

// maxKeysNoted bounds the distinct keys a block notes, and maxKeysShown
// the keys the warning lists.
const (
	maxKeysNoted = 64
	maxKeysShown = 12
)

// keyNote is what a worker saw of the text keys in one block: the JSON
// records without text before the first with text (or all of them), and the
// top-level keys of those records, each with the index of the first record
// that has it.
type keyNote struct {
	missing int64
	text    bool // a record in the block had text at a key
	keys    []keyAt
}

type keyAt struct {
	name string
	at   int64
}

// note records one valid JSON record obj of the block; hasKey means a text
// key was present (with text, or with a value that is no text).
func (n *keyNote) note(obj []byte, hasKey bool, scratch []byte) []byte {
	if n.text {
		return scratch
	}
	if hasKey {
		n.text = true
		return scratch
	}
	if n.missing < keyWatchRecords {
		for j := skipSpace(obj, 0) + 1; len(n.keys) < maxKeysNoted; {
			m, next, more := nextMember(obj, j)
			if !more {
				break
			}
			scratch = appendUnescaped(scratch[:0], obj[m.keyStart+1:m.keyEnd-1])
			seen := false
			for _, k := range n.keys {
				if k.name == string(scratch) {
					seen = true
					break
				}
			}
			if !seen {
				n.keys = append(n.keys, keyAt{string(scratch), n.missing})
			}
			j = next
		}
	}
	n.missing++
	return scratch
}

// keyWatch adds up the blocks' notes in input order, on the writer's
// goroutine, and warns once.
type keyWatch struct {
	warn    func(string)
	paths   []string
	done    *atomic.Bool // set once decided: workers stop noting
	missing int64
	keys    []string
}

func (k *keyWatch) add(n *keyNote) {
	if k.warn == nil || k.done.Load() {
		return
	}
	for _, key := range n.keys {
		if k.missing+key.at < keyWatchRecords && len(k.keys) < maxKeysNoted && !containsString(k.keys, key.name) {
			k.keys = append(k.keys, key.name)
		}
	}
	if k.missing+n.missing >= keyWatchRecords {
		k.missing = keyWatchRecords
		k.finish()
		return
	}
	k.missing += n.missing
	if n.text {
		k.done.Store(true)
	}
}

// finish warns when no JSON record seen so far had text; Run calls it at
// the end of the input.
func (k *keyWatch) finish() {
	if k.warn == nil || k.done.Swap(true) || k.missing == 0 {
		return
	}
	at := make([]string, len(k.paths))
	for i, p := range k.paths {
		at[i] = strconv.Quote(p)
	}
	var msg string
	switch {
	case k.missing == keyWatchRecords:
		msg = fmt.Sprintf("none of the first %s JSON records has text at %s", thousands(keyWatchRecords), strings.Join(at, " or "))
	case k.missing == 1:
		msg = fmt.Sprintf("the only JSON record has no text at %s", strings.Join(at, " or "))
	default:
		msg = fmt.Sprintf("none of the %s JSON records has text at %s", thousands(k.missing), strings.Join(at, " or "))
	}
	shown := make([]string, 0, maxKeysShown)
	for _, key := range k.keys[:min(len(k.keys), maxKeysShown)] {
		shown = append(shown, quoteKey(key))
	}
	switch {
	case len(k.keys) == 0:
		msg += "; they have no keys"
	case len(k.keys) > len(shown):
		msg += fmt.Sprintf("; their keys: %s and %d more", strings.Join(shown, ", "), len(k.keys)-len(shown))
	default:
		msg += "; their keys: " + strings.Join(shown, ", ")
	}
	k.warn(msg)
}

// quoteKey quotes a key that is empty or holds anything but letters,
// digits and _-.@:/$, so that the warning stays one readable line.
func quoteKey(k string) string {
	plain := k != "" && !strings.ContainsFunc(k, func(r rune) bool {
		return !unicode.IsLetter(r) && !unicode.IsDigit(r) && !strings.ContainsRune("_-.@:/$", r)
	})
	if plain {
		return k
	}
	return strconv.Quote(k)
}

func containsString(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// thousands writes n with a comma every three digits.
func thousands(n int64) string {
	s := strconv.FormatInt(n, 10)
	for i := len(s) - 3; i > 0; i -= 3 {
		s = s[:i] + "," + s[i:]
	}
	return s
}
