package token

import (
	"encoding/json"
	"reflect"
	"strings"
	"testing"
)

// tokEscapeCases: sequences per ECMA-48 (5th edition, June 1991): 5.4
// control sequences (CSI, then parameter bytes 03/00..03/15, intermediate
// bytes 02/00..02/15, a final byte 04/00..07/14), 8.3.89 OSC and 8.3.143
// ST as the terminator of a command string; 8.3.117 SGR, 8.3.39 ED,
// 8.3.41 EL, 8.3.21 CUP as examples of final bytes. BEL as an OSC
// terminator and OSC 8 hyperlinks are terminal practice (common practice,
// not in ECMA-48). want is the text left after dropping.
var tokEscapeCases = []struct{ name, in, want string }{
	{"SGR bold", "\x1b[1mprinter", "printer"},
	{"SGR reset", "offline\x1b[0m", "offline"},
	{"SGR 256 colours", "\x1b[38;5;196mERROR\x1b[39m", "ERROR"},
	{"SGR no parameter", "\x1b[mok", "ok"},
	{"ED", "\x1b[2Jclear", "clear"},
	{"EL", "line\x1b[K", "line"},
	{"CUP", "\x1b[12;40Hat", "at"},
	{"private parameter", "\x1b[?25lhidden\x1b[?25h", "hidden"},
	{"intermediate byte", "\x1b[1 qcursor", "cursor"},
	{"final byte 07/14", "a\x1b[1~b", "ab"},
	{"C1 CSI", "\u009b1mbold\u009b0m", "bold"},
	{"OSC BEL", "\x1b]0;deck-3 console\x07ready", "ready"},
	{"OSC ST", "\x1b]2;title\x1b\\ready", "ready"},
	{"OSC C1 ST", "\u009d0;title\u009cready", "ready"},
	{"OSC 8 hyperlink", "see \x1b]8;;https://ferry.example/status\x1b\\status page\x1b]8;;\x1b\\ now", "see status page now"},
	{"OSC with UTF-8", "\x1b]0;Паром\x07Паром", "Паром"},
	{"non-ASCII around", "\x1b[31mПаром\x1b[0m отменён", "Паром отменён"},
	{"two in a row", "\x1b[1m\x1b[31mred", "red"},
	// Kept: cut off, or a byte outside the ranges.
	{"CSI cut off", "ok\x1b[1", "ok\x1b[1"},
	{"CSI bad byte", "\x1b[1\x01m", "\x1b[1\x01m"},
	{"CSI final DEL", "\x1b[1\x7f", "\x1b[1\x7f"},
	{"OSC unterminated", "\x1b]0;title", "\x1b]0;title"},
	{"OSC ESC not ST", "\x1b]0;a\x1b[1mb", "\x1b]0;ab"},
	{"lone ESC", "a\x1bb", "a\x1bb"},
	{"other escape kept", "\x1b(Bx", "\x1b(Bx"},
	{"lone 0x9b byte", "a\x9b1mb", "a\x9b1mb"},
}

func TestDropEscapes(t *testing.T) {
	for _, c := range tokEscapeCases {
		t.Run(c.name, func(t *testing.T) {
			if got := string(dropEscapes(nil, []byte(c.in))); got != c.want {
				t.Errorf("dropEscapes(%+q) = %+q, want %+q", c.in, got, c.want)
			}
			if hasEscape([]byte(c.in)) != strings.ContainsAny(c.in, "\x1b\u009b\u009d") {
				t.Errorf("hasEscape(%+q) wrong", c.in)
			}
			// The tokens are those of the text without the sequences,
			// under every setting.
			for _, set := range tokSettings {
				on := set
				on.DropEscapes = true
				got := tokenizeStrings(New(on), c.in)
				want := tokenizeStrings(New(set), c.want)
				if !reflect.DeepEqual(got, want) && !(len(got) == 0 && len(want) == 0) {
					t.Errorf("%+v %+q: %+q, want %+q", on, c.in, got, want)
				}
			}
		})
	}
}

// TestDropEscapesJournal: a console line with colours, as journal and
// console messages carry them. Without the setting (model files made
// before it) the tokens stay what they were.
func TestDropEscapesJournal(t *testing.T) {
	line := "Dec 02 18:40:01 harbour-gw printd[812]: \x1b[1;31mERROR\x1b[0m printer \x1b[1mdeck-3\x1b[0m offline"
	got := tokenizeStrings(New(Defaults()), line)
	want := []string{"dec", "<num>", "<num>", "<num>", "<num>", "harbour", "gw", "printd", "<num>", "error", "printer", "deck", "<num>", "offline"}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("with DropEscapes: %q, want %q", got, want)
	}
	// UAX #29: WB11/WB12 keep "1;31" together, WB10 joins "merror".
	old := tokenizeStrings(New(Settings{}), line)
	wantOld := []string{"dec", "<num>", "<num>", "<num>", "<num>", "harbour", "gw", "printd", "<num>", "1;31merror", "0m", "printer", "1mdeck", "<num>", "0m", "offline"}
	if !reflect.DeepEqual(old, wantOld) {
		t.Errorf("without: %q, want today's %q", old, wantOld)
	}
}

// TestSettingsJSON: a file without drop_escapes decodes to false (today's
// tokens); false is not written, so the settings JSON of models made
// before the key is byte for byte what it was.
func TestSettingsJSON(t *testing.T) {
	var s Settings
	if err := json.Unmarshal([]byte(`{"keep_punct":false,"max_tokens":0,"no_placeholders":false}`), &s); err != nil || s.DropEscapes {
		t.Fatalf("old settings: %+v, %v", s, err)
	}
	b, _ := json.Marshal(Settings{})
	if string(b) != `{"keep_punct":false,"max_tokens":0,"no_placeholders":false}` {
		t.Errorf("zero settings encode as %s", b)
	}
	b, _ = json.Marshal(Defaults())
	if string(b) != `{"keep_punct":false,"max_tokens":0,"no_placeholders":false,"drop_escapes":true}` {
		t.Errorf("defaults encode as %s", b)
	}
}
