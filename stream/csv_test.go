package stream

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// The reference for every check here is encoding/csv (RFC 4180), with
// Comma ',' for CSV and '\t' for TSV, LazyQuotes off.

func refReader(in []byte, sep byte) *csv.Reader {
	r := csv.NewReader(bytes.NewReader(in))
	r.Comma = rune(sep)
	r.FieldsPerRecord = -1
	r.ReuseRecord = false
	return r
}

// refRecords reads in with encoding/csv; ok is false on any error.
func refRecords(in []byte, sep byte) ([][]string, bool) {
	recs, err := refReader(in, sep).ReadAll()
	return recs, err == nil
}

// csvInput is a small invented chat export with the cases RFC 4180 allows:
// quoted separators, doubled quotes, line breaks in quotes, empty fields,
// CRLF, and a blank line.
const csvInput = "id,text,who\r\n" +
	"1,the ferry is late in the fog,ann\r\n" +
	"2,\"a storm, \"\"a big one\"\"\nover two lines\",bo\r\n" +
	"\r\n" +
	"3,,cy\n" +
	"4,\"rain, rain\",\n" +
	"5,bad\"quote,dee\n" +
	"6,too,many,fields\n" +
	"7,\"deck chairs\r\non the ferry\",eli\n" +
	"8,\"unterminated,fay\n" +
	"9,never read as a record,gus\n"

func TestCSVGolden(t *testing.T) {
	for _, tc := range []struct {
		name string
		in   string
		opts Options
	}{
		{"csv", csvInput, Options{Format: InputCSV}},
		{"csv_keys", csvInput, Options{Format: InputCSV, TextKeys: []string{"text", "who"}, TagKey: "class", ConfidenceKey: "p"}},
		{"csv_keep", csvInput, Options{Format: InputCSV, Keep: []string{"weather"}}},
		{"tsv", strings.ReplaceAll(csvInput, ",", "\t"), Options{Format: InputTSV}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for _, jobs := range []int{1, 2, 8} {
				for _, bs := range []int{0, 7, 64} {
					o := tc.opts
					o.Jobs, o.BlockSize = jobs, bs
					out, _, errs := runString(t, o, tc.in)
					var b strings.Builder
					b.WriteString(out)
					b.WriteString("-- errors --\n")
					for _, e := range errs {
						fmt.Fprintln(&b, e)
					}
					if jobs == 1 && bs == 0 {
						golden(t, "csv_"+tc.name+".golden", []byte(b.String()))
						continue
					}
					want, _ := os.ReadFile(filepath.Join("testdata", "csv_"+tc.name+".golden"))
					if b.String() != string(want) {
						t.Errorf("-j %d, block size %d differs from the golden file:\n%s", jobs, bs, b.String())
					}
				}
			}
		})
	}
}

// TestCSVLinesAndErrors: the lines the record errors name are the start
// lines encoding/csv gives for the same records, and every output row
// holds its input row's bytes before the two new fields.
func TestCSVLinesAndErrors(t *testing.T) {
	out, st, errs := runString(t, Options{Format: InputCSV, Jobs: 1}, csvInput)
	// The reference's start line of each record, one record at a time: a
	// record it cannot read is skipped by cutting the input at the next
	// line and reading on.
	var want []int
	ref := refReader([]byte(csvInput), ',')
	for {
		_, err := ref.Read()
		if err == io.EOF {
			break
		}
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			want = append(want, pe.StartLine)
			if !errors.Is(err, csv.ErrFieldCount) {
				break // the reader cannot go on after a syntax error
			}
		}
	}
	var got []int
	for _, e := range errs {
		var re *RecordError
		if !errors.As(e, &re) {
			t.Fatalf("not a record error: %v", e)
		}
		got = append(got, int(re.Line))
	}
	// encoding/csv stops at the bare quote (line 8); the field-count error
	// before and the bare quote agree.
	if len(got) < len(want) || !slices.Equal(got[:len(want)], want) {
		t.Errorf("error lines %v, encoding/csv's %v", got, want)
	}
	if st.Malformed != 3 || st.Blank != 1 {
		t.Errorf("stats %+v", st)
	}
	if !strings.HasPrefix(out, "id,text,who,tag,confidence\r\n1,the ferry is late in the fog,ann,") {
		t.Errorf("output starts %q", out[:60])
	}
}

func TestCSVHeaderErrors(t *testing.T) {
	for _, tc := range []struct {
		name, in string
		opts     Options
		want     error
		msg      string
	}{
		{"no text column", "id,body\n1,x\n", Options{}, ErrNoColumn, `stdin:1: header: no such column: "text" (the header has "id", "body")`},
		{"named twice", "text,id,text\nx,1,y\n", Options{}, ErrDupColumn, `stdin:1: header: column named twice: "text"`},
		{"tag column there", "text,tag\nx,y\n", Options{}, ErrDupColumn, `stdin:1: header: column named twice: "tag", which tag adds (choose another name for it)`},
		{"bad quote", "\n\n\"text,id\n", Options{}, ErrQuote, `stdin:3: header: extraneous or missing " in quoted field (the record runs to the end of its input)`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			o := tc.opts
			o.Format, o.Tagger = InputCSV, newKeywordTagger()
			var out bytes.Buffer
			_, err := Run(t.Context(), o, nil, strings.NewReader(tc.in), &out)
			var he *HeaderError
			if !errors.As(err, &he) || !errors.Is(err, tc.want) || err.Error() != tc.msg {
				t.Fatalf("got %v, want %q", err, tc.msg)
			}
			if strings.Contains(out.String(), "text") {
				t.Errorf("rows written after a bad header: %q", out.String())
			}
		})
	}
	if _, err := newConfig(Options{Tagger: newKeywordTagger(), Format: InputTSV, Scores: true}); err == nil {
		t.Error("--scores accepted for TSV")
	}
}

// csvRows turns fuzz bytes into rows of fields drawn from pieces that
// need quoting (separators, quotes, CR, LF, spaces) and ones that do not.
func csvRows(seed []byte, cols int) [][]string {
	pieces := []string{"", "ferry", "fog", ",", "\t", "\"", "\n", "\r\n", "\r", " ", "deck", "a\"b", "é", "storm,\"wind\""}
	var rows [][]string
	row := []string{}
	var f strings.Builder
	for i, c := range seed {
		f.WriteString(pieces[int(c)%len(pieces)])
		if c&0x30 == 0 || i == len(seed)-1 {
			row = append(row, f.String())
			f.Reset()
			if len(row) == cols {
				rows = append(rows, row)
				row = []string{}
			}
		}
	}
	return rows
}

// FuzzCSVRoundTrip writes rows with encoding/csv's Writer, tags them, and
// reads the output back with encoding/csv's Reader: every row comes back
// with its fields unchanged and two more, in order, and its input bytes
// are kept byte for byte.
func FuzzCSVRoundTrip(f *testing.F) {
	f.Add([]byte("ferry,\"fog\"\n\r\n"), false, false, uint8(2))
	f.Add([]byte{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 0x30, 0x31}, true, true, uint8(5))
	f.Fuzz(fuzzRoundTripOnce)
}

func fuzzRoundTripOnce(t *testing.T, seed []byte, tsv, crlf bool, jobs uint8) {
	sep := byte(',')
	format := InputCSV
	if tsv {
		sep, format = '\t', InputTSV
	}
	rows := csvRows(seed, 3)
	var in bytes.Buffer
	w := csv.NewWriter(&in)
	w.Comma, w.UseCRLF = rune(sep), crlf
	w.Write([]string{"id", "text", "note"})
	for _, r := range rows {
		w.Write(r)
	}
	w.Flush()
	// What the reference reads from the input is what must come back.
	ref, err := refReader(in.Bytes(), sep).ReadAll()
	if err != nil {
		t.Fatalf("encoding/csv cannot read its own output %q: %v", in.String(), err)
	}
	rows = ref[1:]
	opts := Options{Format: format, Jobs: int(jobs%4) + 1, BlockSize: int(jobs%3) * 40}
	out, st, errs := runString(t, opts, in.String())
	if len(errs) > 0 {
		t.Fatalf("errors %v for %q", errs, in.String())
	}
	got, err := refReader([]byte(out), sep).ReadAll()
	if err != nil {
		t.Fatalf("output is not %c-separated: %v\n%q", sep, err, out)
	}
	if len(got) != len(rows)+1 || !slices.Equal(got[0], []string{"id", "text", "note", "tag", "confidence"}) {
		t.Fatalf("%d rows back for %d (+ header)", len(got), len(rows))
	}
	for i, r := range rows {
		g := got[i+1]
		if len(g) != 5 || !slices.Equal(g[:3], r) {
			t.Fatalf("row %d: %q back for %q", i+1, g, r)
		}
	}
	// Byte-exact: dropping the appended fields gives back the input.
	var back bytes.Buffer
	for i := 0; i < len(out); {
		rec, term, next, _ := nextCSV([]byte(out), i, sep)
		if len(rec) > 0 {
			k := bytes.LastIndexByte(rec, sep)
			k = bytes.LastIndexByte(rec[:k], sep)
			rec = rec[:k]
		}
		back.Write(rec)
		back.Write(term)
		i = next
	}
	if back.String() != in.String() {
		t.Fatalf("input bytes not kept:\n%q\n%q", in.String(), back.String())
	}
	if st.Records-st.Blank != int64(len(rows))+1 {
		t.Fatalf("%d records counted for %d rows", st.Records, len(rows))
	}
}

// FuzzCSVCut: the record cutter's records rejoined equal the input; the
// block cutter's boundaries are records' ends; and where encoding/csv
// reads the whole input, each record splits into the fields it reads.
func FuzzCSVCut(f *testing.F) {
	f.Add([]byte(csvInput), false)
	f.Add([]byte("a\t\"b\n\"\"c\"\t\r\n\n\"\""), true)
	f.Add([]byte("\"x\"y,z\n\"\r\n\"\n"), false)
	f.Fuzz(func(t *testing.T, in []byte, tsv bool) {
		sep := byte(',')
		if tsv {
			sep = '\t'
		}
		var joined []byte
		var ends []int
		var recs [][]string
		var p csvParser
		p.sep = sep
		parsedAll := true
		for i := 0; i < len(in); {
			rec, term, next, inner := nextCSV(in, i, sep)
			if next <= i {
				t.Fatalf("no progress at %d", i)
			}
			if got := bytes.Count(rec, []byte("\n")); got != inner {
				t.Fatalf("%d inner line breaks counted, %d there", inner, got)
			}
			joined = append(append(joined, rec...), term...)
			if bytes.HasSuffix(term, []byte("\n")) {
				ends = append(ends, next-1)
			}
			if len(rec) > 0 {
				if p.parse(rec) != nil {
					parsedAll = false
				} else {
					var fs []string
					for _, f := range p.fields {
						fs = append(fs, string(f))
					}
					recs = append(recs, fs)
				}
			}
			i = next
		}
		if !bytes.Equal(joined, in) {
			t.Fatalf("records rejoined %q, input %q", joined, in)
		}
		// The cutter's scan, fed in two pieces, ends records where
		// nextCSV does.
		for _, cut := range []int{0, len(in) / 2, len(in)} {
			k1, s := csvCut(in[:cut], csvFieldStart, sep)
			k2, _ := csvCut(in[cut:], s, sep)
			last := k1
			if k2 >= 0 {
				last = cut + k2
			}
			want := -1
			if len(ends) > 0 {
				want = ends[len(ends)-1]
			}
			if last != want {
				t.Fatalf("cut at %d: last boundary %d, records end at %v", cut, last, ends)
			}
		}
		ref, ok := refRecords(in, sep)
		if !ok {
			return
		}
		if !parsedAll || !slices.EqualFunc(recs, ref, slices.Equal[[]string]) {
			t.Fatalf("fields %q, encoding/csv's %q", recs, ref)
		}
	})
}

// TestReadLabelledCSV: train's and eval's records from CSV and TSV are
// encoding/csv's rows, the header never among them.
func TestReadLabelledCSV(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, tsv := range []bool{false, true} {
		sep, format := byte(','), LabelledCSV
		if tsv {
			sep, format = '\t', LabelledTSV
		}
		var in bytes.Buffer
		w := csv.NewWriter(&in)
		w.Comma = rune(sep)
		w.Write([]string{"queue", "subject", "body"})
		labels := []string{"tickets", "lost-and-found", " praise "}
		for i := range 40 {
			seed := make([]byte, 12)
			for k := range seed {
				seed[k] = byte(rng.IntN(256))
			}
			row := csvRows(seed, 2)
			if len(row) == 0 {
				row = [][]string{{"x", "y"}}
			}
			w.Write([]string{labels[i%3], row[0][0], row[0][1]})
		}
		w.Flush()
		path := filepath.Join(t.TempDir(), "tickets.csv")
		os.WriteFile(path, in.Bytes(), 0o644)
		set, err := ReadLabelled([]string{path}, LabelledOptions{Format: format, TextColumns: []string{"subject", "body"}, LabelColumn: "queue", Report: 100})
		ref, _ := refRecords(in.Bytes(), sep)
		var want []string
		for _, r := range ref[1:] {
			if text := r[1] + " " + r[2]; strings.TrimSpace(text) != "" {
				want = append(want, strings.TrimSpace(r[0])+"|"+text)
			}
		}
		if err != nil {
			t.Fatal(err)
		}
		var got []string
		for _, r := range set.Records {
			got = append(got, r.Labels[0]+"|"+r.Text)
		}
		if !slices.Equal(got, want) {
			t.Errorf("tsv %v: records\n%q\nwant\n%q", tsv, got, want)
		}
		if _, err := ReadLabelled([]string{path}, LabelledOptions{Format: format}); !errors.As(err, new(*HeaderError)) || !strings.Contains(err.Error(), path+":1: header: no such column: \"text\"") {
			t.Errorf("default columns: %v", err)
		}
	}
	// The headerless format never trains on a header line.
	set, err := ReadLabelled([]string{"-"}, LabelledOptions{Format: LabelledTabText, Stdin: strings.NewReader("label\ttext\nspam\twin a cruise\n")})
	if err != nil || len(set.Records) != 1 || set.Skipped != 1 || !errors.Is(set.Problems[0], ErrHeaderLine) {
		t.Errorf("label-tab-text header: %v %+v", err, set)
	}
}

// TestCSVBlankBeforeHeader: blank lines before the header may come in a
// block of their own (tiny blocks here, a pause in a live input in use);
// the header is then the first record of a later block.
func TestCSVBlankBeforeHeader(t *testing.T) {
	want, _, errs := runString(t, Options{Format: InputCSV, Jobs: 1}, csvInput)
	for _, bs := range []int{1, 2, 3} {
		got, _, errs2 := runString(t, Options{Format: InputCSV, Jobs: 1, BlockSize: bs}, "\n\r\n"+csvInput)
		if got != "\n\r\n"+want || len(errs2) != len(errs) {
			t.Errorf("block size %d: %q, errors %v", bs, got, errs2)
		}
	}
}
