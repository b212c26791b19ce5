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

// tokBenchScripts: invented chat lines about the same invented ferry
// service in several scripts, for the per-script benchmark. English is the
// baseline of the same run (tokBenchASCII).
var tokBenchScripts = []struct {
	name  string
	lines []string
}{
	{"english", tokBenchASCII},
	{"russian", []string{
		"Паром из Варло в Оск сегодня идёт по расписанию?",
		"@harbour_desk мой велосипед остался на палубе, проверьте пожалуйста",
		"Билеты: https://ferry.example/tickets?route=varlo-osk",
		"Отличная переправа, спокойное море, экипаж очень вежливый",
		"ПОТЕРЯН синий рюкзак у причала 3, около 16:00",
		"Почему вечерний паром всегда опаздывает на 20 минут??",
		"Можно взять двух собак на рейс в 7:15 до Бреннхольма?",
		"Верните деньги за бронь 88213, рейс отменили",
	}},
	{"greek", []string{
		"Το πλοίο από Βάρλο για Οσκ φεύγει κανονικά σήμερα;",
		"@harbour_desk το ποδήλατό μου έμεινε στο κατάστρωμα, ελέγξτε παρακαλώ",
		"Εισιτήρια: https://ferry.example/tickets?route=varlo-osk",
		"Υπέροχο ταξίδι, ήρεμη θάλασσα και ευγενικό πλήρωμα",
		"ΧΑΘΗΚΕ μπλε σακίδιο στην προβλήτα 3, γύρω στις 4μμ",
		"Γιατί το βραδινό πλοίο αργεί πάντα 20 λεπτά;;",
		"Μπορώ να πάρω δύο σκύλους στο δρομολόγιο των 7:15;",
		"Επιστροφή χρημάτων για την κράτηση 88213, ακυρώθηκε",
	}},
	{"arabic", []string{
		"هل العبارة من فارلو إلى أوسك تعمل اليوم؟",
		"@harbour_desk دراجتي ما زالت على سطح السيارات، هل يمكن التحقق",
		"التذاكر: https://ferry.example/tickets?route=varlo-osk",
		"رحلة رائعة، البحر هادئ والطاقم لطيف جدا",
		"مفقود: حقيبة ظهر زرقاء عند الرصيف ٣ حوالي الساعة ٤",
		"لماذا تتأخر العبارة المسائية دائما عشرين دقيقة؟؟",
		"هل يمكنني إحضار كلبين في رحلة ٧:١٥ إلى برينهولم؟",
		"أريد استرداد ثمن الحجز ٨٨٢١٣، تم إلغاء الرحلة",
	}},
	{"hindi", []string{
		"क्या वारलो से ओस्क की नाव आज समय पर चल रही है?",
		"@harbour_desk मेरी साइकिल अभी भी डेक पर है, कृपया देखिए",
		"टिकट: https://ferry.example/tickets?route=varlo-osk",
		"शानदार यात्रा, शांत समुद्र और बहुत अच्छा दल",
		"खोया: नीला बैग, घाट ३ के पास, लगभग चार बजे",
		"शाम की नाव हमेशा बीस मिनट देर से क्यों आती है??",
		"क्या मैं ७:१५ वाली नाव में दो कुत्ते ला सकता हूँ?",
		"बुकिंग ८८२१३ का पैसा वापस कीजिए, यात्रा रद्द हो गई",
	}},
	{"japanese", []string{
		"ヴァルロ発オスク行きのフェリーは今日運航していますか",
		"@harbour_desk 自転車がまだ車両甲板にあります、確認してください",
		"チケット: https://ferry.example/tickets?route=varlo-osk",
		"素晴らしい船旅でした。海は穏やかで、乗組員も親切でした",
		"青いリュックを3番桟橋でなくしました、午後4時ごろです",
		"夕方の便はどうしていつも20分遅れるのですか",
		"7時15分の便に犬を2匹連れて行けますか",
		"予約88213の払い戻しをお願いします、欠航になりました",
	}},
	{"chinese", []string{
		"今天从瓦尔洛到奥斯克的渡轮正常开吗",
		"@harbour_desk 我的自行车还在车辆甲板上，请帮忙看一下",
		"船票: https://ferry.example/tickets?route=varlo-osk",
		"航行很棒，海面平静，船员也很友好",
		"在3号码头丢了一个蓝色背包，大约下午4点",
		"为什么晚班渡轮总是晚点20分钟",
		"7点15分去布伦霍尔姆的船可以带两只狗吗",
		"预订88213请退款，航班取消了",
	}},
	{"german", []string{
		"Fährt die Fähre von Varlo nach Øsk heute pünktlich?",
		"@harbour_desk mein Fahrrad steht noch auf dem Autodeck, bitte prüfen",
		"Tickets: https://ferry.example/tickets?route=varlo-osk",
		"Tolle Überfahrt, ruhige See und eine sehr freundliche Crew",
		"VERLOREN: blauer Rucksack an Anleger 3, gegen 16 Uhr",
		"Warum ist das Abendschiff immer 20 Minuten zu spät??",
		"Darf ich zwei Hunde auf die 7:15 nach Brennholm mitnehmen?",
		"Bitte Erstattung für Buchung 88213, die Fahrt fiel aus",
	}},
	{"french", []string{
		"Le ferry de Varlo à Øsk part-il à l’heure aujourd’hui ?",
		"@harbour_desk mon vélo est resté sur le pont garage, pouvez-vous vérifier",
		"Billets : https://ferry.example/tickets?route=varlo-osk",
		"Très belle traversée, mer calme et équipage très aimable",
		"PERDU : sac à dos bleu au quai 3, vers 16 h",
		"Pourquoi le bateau du soir a-t-il toujours 20 minutes de retard ??",
		"Puis-je emmener deux chiens sur le départ de 7 h 15 ?",
		"Remboursement pour la réservation 88213 s’il vous plaît, annulé",
	}},
}

// BenchmarkTokenizeScript: one line per op, per script; path=general is
// the general path (what Tokenize did before the fast path, and still does
// for what the table lacks), path=tokenize is Tokenize. Compare with
// benchstat -col /path; ns/byte is ns/op divided by the mean line length.
func BenchmarkTokenizeScript(b *testing.B) {
	tk := New(Settings{})
	for _, set := range tokBenchScripts {
		lines, avg := tokBenchBytes(set.lines)
		for _, path := range []string{"general", "tokenize"} {
			b.Run("script="+set.name+"/path="+path, func(b *testing.B) {
				b.SetBytes(int64(avg))
				b.ReportAllocs()
				var ts Tokens
				i := 0
				for b.Loop() {
					if path == "general" && !isASCII(lines[i%len(lines)]) {
						tk.tokenizeGeneral(&ts, lines[i%len(lines)], cutHybrid)
					} else {
						tk.Tokenize(&ts, lines[i%len(lines)])
					}
					i++
				}
				tokReportLines(b)
				if s := b.Elapsed().Seconds(); s > 0 {
					b.ReportMetric(s*1e9/float64(b.N)/float64(avg), "ns/byte")
				}
			})
		}
	}
}
