package token

import (
	"bytes"
	"testing"

	"github.com/rivo/uniseg"
)

// Short chat-like lines (invented ferry service between invented islands).
var tokBenchASCII = []string{
	"is the 10:30 ferry from Varlo to Osk running today?",
	"@harbour_desk my bike is still on the car deck, can someone check",
	"Tickets: https://ferry.example/tickets?route=varlo-osk&day=sat",
	"great crossing, calm sea and the crew were lovely :)",
	"LOST: blue backpack, pier 3, around 4pm. mail mira.tolv@isles.example",
	"why is the evening boat always 20 min late??",
	"Can I bring 2 dogs on the 7:15 to Brennholm?",
	"refund for booking 88213 please, the sailing was cancelled",
}

var tokBenchUnicode = []string{
	"Fähre nach Øsk heute pünktlich? Danke 🙏",
	"Το πλοίο για Βάρλο αργεί πάλι 😡😡",
	"フェリーは10時30分に出発しますか？",
	"café on board was great 👍🏽 merci!",
	"ＦＵＬＬ ticket office at pier ３ — closed’til noon",
	"🇬🇷🇮🇹 crew, 👨‍👩‍👧 cabin upgrade: ﬁve stars",
	"Straße zum Hafen gesperrt, Bus fährt um 7:15",
	"배를 놓쳤어요 ㅠㅠ 다음 배는 언제?",
}

// Mostly ASCII with an emoji, an accent or a curly apostrophe: common in
// chat.
var tokBenchMixed = []string{
	"is the 10:30 ferry from Värlo to Osk running today? 🙏",
	"@harbour_desk my bike is still on the car deck 😡",
	"great crossing, calm sea and the crew were lovely 👍🏽",
	"can’t find my ticket, booked on https://ferry.example/tickets",
	"LOST: blue backpack, pier 3, around 4pm — mail mira.tolv@isles.example",
	"café on board was great, merci!",
	"why is the evening boat always 20 min late?? 🙄🙄",
	"Can I bring 2 dogs on the 7:15 to Brennhölm?",
}

func tokBenchBytes(lines []string) ([][]byte, int) {
	out := make([][]byte, len(lines))
	n := 0
	for i, l := range lines {
		out[i] = []byte(l)
		n += len(l)
	}
	return out, n / len(lines)
}

func tokReportLines(b *testing.B) {
	if s := b.Elapsed().Seconds(); s > 0 {
		b.ReportMetric(float64(b.N)/s, "lines/s")
	}
}

// BenchmarkTokenize: one line per op. "fields" is the baseline for the
// same run: bytes.Fields and ASCII lower-casing into the same storage,
// the least a tokenizer does. "uniseg" is uniseg.FirstWord alone over the
// line, the floor of the general path.
func BenchmarkTokenize(b *testing.B) {
	tk := New(Settings{})
	for _, set := range []struct {
		name  string
		lines []string
	}{{"ascii", tokBenchASCII}, {"mixed", tokBenchMixed}, {"unicode", tokBenchUnicode}} {
		lines, avg := tokBenchBytes(set.lines)
		b.Run(set.name+"/fields", func(b *testing.B) {
			b.SetBytes(int64(avg))
			b.ReportAllocs()
			var ts Tokens
			i := 0
			for b.Loop() {
				ts.Reset()
				for _, f := range bytes.Fields(lines[i%len(lines)]) {
					n := len(ts.buf)
					ts.add(f)
					for j, c := range ts.buf[n:] {
						if c-'A' < 26 {
							ts.buf[n+j] = c + 'a' - 'A'
						}
					}
				}
				i++
			}
			tokReportLines(b)
		})
		b.Run(set.name+"/uniseg", func(b *testing.B) {
			b.SetBytes(int64(avg))
			b.ReportAllocs()
			i, segs := 0, 0
			for b.Loop() {
				state, rest := -1, lines[i%len(lines)]
				for len(rest) > 0 {
					_, rest, state = uniseg.FirstWord(rest, state)
					segs++
				}
				i++
			}
			tokReportLines(b)
		})
		b.Run(set.name+"/tokenize", func(b *testing.B) {
			b.SetBytes(int64(avg))
			b.ReportAllocs()
			var ts Tokens
			i := 0
			for b.Loop() {
				tk.Tokenize(&ts, lines[i%len(lines)])
				i++
			}
			tokReportLines(b)
		})
		// The general path with uniseg alone, the reference the fast
		// path and the hybrid segmenter are tested against.
		b.Run(set.name+"/tokenize-uniseg", func(b *testing.B) {
			b.SetBytes(int64(avg))
			b.ReportAllocs()
			var ts Tokens
			i := 0
			for b.Loop() {
				tk.tokenizeGeneral(&ts, lines[i%len(lines)], cutUniseg)
				i++
			}
			tokReportLines(b)
		})
	}
}
