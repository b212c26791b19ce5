package main

import (
	"encoding/csv"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// ticketsCSV is an invented ticket export: quoted commas, doubled quotes,
// a line break inside a quoted field, CRLF, an empty text.
const ticketsCSV = "id,subject,body,queue\r\n" +
	"101,refund,\"charged twice for the 9:40 crossing, please refund\",tickets\r\n" +
	"102,found,\"a \"\"blue\"\" umbrella\nleft on the upper deck\",lost-and-found\r\n" +
	"103,,the crew were lovely,praise\r\n" +
	"104,timetable,when does the first ferry leave,schedule\r\n" +
	"105,offer,win a free cruise now,spam\r\n" +
	"106,delay,is the evening boat on time,schedule\r\n" +
	"107,thanks,great service on deck,praise\r\n" +
	"108,ticket,my ticket was charged twice,tickets\r\n"

func TestTagCSV(t *testing.T) {
	fixture(t)
	dir := t.TempDir()
	in := filepath.Join(dir, "tickets.csv")
	os.WriteFile(in, []byte(ticketsCSV), 0o644)
	code, out, errs := runCmd(t, "", "tag", "-m", evalModel, "-j", "1", "--format", "csv", "--text-column", "subject", "--text-column", "body", in)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	golden(t, "tag-csv", out)
	// encoding/csv (the reference) reads every input row back, each with
	// two more fields, and the header with the two names.
	inRows, err := csv.NewReader(strings.NewReader(ticketsCSV)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	outRows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatalf("output is not CSV: %v", err)
	}
	if len(outRows) != len(inRows) || !slices.Equal(outRows[0], append(inRows[0], "tag", "confidence")) {
		t.Fatalf("%d rows back for %d; header %q", len(outRows), len(inRows), outRows[0])
	}
	for i := range inRows {
		if !slices.Equal(outRows[i][:4], inRows[i]) {
			t.Errorf("row %d: %q back for %q", i, outRows[i], inRows[i])
		}
	}
	// --keep leaves rows out, never the header.
	_, kept, _ := runCmd(t, "", "tag", "-m", evalModel, "--format", "csv", "--text-column", "body", "--keep", "spam", in)
	if !strings.HasPrefix(kept, "id,subject,body,queue,tag,confidence\r\n") {
		t.Errorf("--keep output %q", kept)
	}

	for _, tc := range []struct {
		name string
		args []string
		code int
		want []string
	}{
		{"no such column", []string{"--format", "csv", in}, exitUsage, []string{in + `:1: header: no such column: "text" (the header has "id", "subject", "body", "queue")`, "try: --text-column"}},
		{"tag column there", []string{"--format", "csv", "--text-column", "body", "--tag-key", "queue", in}, exitUsage, []string{`column named twice: "queue"`, "try: "}},
		{"-k with csv", []string{"--format", "csv", "-k", "body", in}, exitUsage, []string{"--text-column", "try: "}},
		{"--text-column with json", []string{"--text-column", "body", in}, exitUsage, []string{"--format csv or tsv", "try: "}},
		{"--scores with csv", []string{"--format", "tsv", "--scores", in}, exitUsage, []string{"--scores", "try: "}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			code, _, errs := runCmd(t, "", append([]string{"tag", "-m", evalModel}, tc.args...)...)
			if code != tc.code {
				t.Errorf("exit %d, want %d: %s", code, tc.code, errs)
			}
			for _, w := range tc.want {
				if !strings.Contains(errs, w) {
					t.Errorf("stderr %q lacks %q", errs, w)
				}
			}
		})
	}
}

// TestTrainEvalCSV: train and eval read the same records from a CSV or TSV
// with a header as from the same rows as JSON Lines (written from
// encoding/csv's reading), and never take the header for a record.
func TestTrainEvalCSV(t *testing.T) {
	fixture(t)
	dir := t.TempDir()
	rows, err := csv.NewReader(strings.NewReader(ticketsCSV)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var jl, tsv strings.Builder
	w := csv.NewWriter(&tsv)
	w.Comma = '\t'
	for _, r := range rows {
		w.Write(r)
	}
	w.Flush()
	for _, r := range rows[1:] {
		b, _ := json.Marshal(map[string]string{"text": r[1] + " " + r[2], "label": r[3]})
		jl.Write(append(b, '\n'))
	}
	csvPath, tsvPath, jlPath := filepath.Join(dir, "t.csv"), filepath.Join(dir, "t.tsv"), filepath.Join(dir, "t.jsonl")
	os.WriteFile(csvPath, []byte(ticketsCSV), 0o644)
	os.WriteFile(tsvPath, []byte(tsv.String()), 0o644)
	os.WriteFile(jlPath, []byte(jl.String()), 0o644)
	cols := []string{"--text-column", "subject", "--text-column", "body", "--label-column", "queue"}

	train := []string{"train", "-q", "-j", "1", "--seed", "2", "--epochs", "2", "--vector-size", "8", "--filters", "4", "--no-fold", "--dev-fraction", "0.5"}
	var tagged, labels []string
	for _, c := range []struct{ name, path, format string }{{"jsonl", jlPath, "jsonl"}, {"csv", csvPath, "csv"}, {"tsv", tsvPath, "tsv"}} {
		m := filepath.Join(dir, c.name+".safetensors")
		args := append(append([]string{}, train...), "-o", m, "--format", c.format, c.path)
		if c.format != "jsonl" {
			args = append(args, cols...)
		}
		if code, _, errs := runCmd(t, "", args...); code != exitOK {
			t.Fatalf("train %s: exit %d: %s", c.name, code, errs)
		}
		code, out, errs := runCmd(t, "", "inspect", "--json", m)
		if code != exitOK {
			t.Fatalf("inspect: %s", errs)
		}
		var info struct{ Labels []string }
		json.Unmarshal([]byte(out), &info)
		if slices.Contains(info.Labels, "queue") || len(info.Labels) < 2 || (labels != nil && !slices.Equal(info.Labels, labels)) {
			t.Errorf("%s: labels %q, from JSON Lines %q", c.name, info.Labels, labels)
		}
		labels = info.Labels
		_, out, _ = runCmd(t, "", "tag", "-m", m, "--format", "text", "-j", "1", jlPath)
		tagged = append(tagged, out)

		evalArgs := []string{"eval", "--json", "-m", evalModel, "--format", c.format, c.path}
		if c.format != "jsonl" {
			evalArgs = append(evalArgs, cols...)
		}
		code, out, errs = runCmd(t, "", evalArgs...)
		if code != exitOK {
			t.Fatalf("eval %s: exit %d: %s", c.name, code, errs)
		}
		var got map[string]any
		json.Unmarshal([]byte(out), &got)
		delete(got, "files")
		if c.name == "jsonl" {
			evalRef = got
		} else if !reflect.DeepEqual(got, evalRef) {
			t.Errorf("eval of %s differs from JSON Lines in %v", c.name, diffKeys(got, evalRef))
		}
	}
	if tagged[1] != tagged[0] || tagged[2] != tagged[0] {
		t.Errorf("models trained on CSV/TSV tag differently from one trained on JSON Lines")
	}

	// Flags the format would ignore are usage errors.
	for _, args := range [][]string{
		{"train", "-o", filepath.Join(dir, "z.safetensors"), "--format", "csv", "--text-key", "body", csvPath},
		{"eval", "-m", evalModel, "--format", "tsv", "--label-key", "queue", tsvPath},
		{"train", "-o", filepath.Join(dir, "z.safetensors"), "--text-column", "body", jlPath},
		{"eval", "-m", evalModel, "--format", "label-tab-text", "--label-column", "queue", jlPath},
	} {
		if code, _, errs := runCmd(t, "", args...); code != exitUsage || !strings.Contains(errs, "try: ") {
			t.Errorf("%v: exit %d: %s", args, code, errs)
		}
	}
	// A header that lacks the columns is a usage error naming file and line.
	code, _, errs := runCmd(t, "", "train", "-o", filepath.Join(dir, "x.safetensors"), "--format", "csv", csvPath)
	if code != exitUsage || !strings.Contains(errs, csvPath+`:1: header: no such column: "text"`) || !strings.Contains(errs, "label-tab-text") {
		t.Errorf("train without columns: exit %d: %s", code, errs)
	}
	// label<TAB>text lines: a header line there is reported, not trained on.
	ltt := filepath.Join(dir, "plain.txt")
	os.WriteFile(ltt, []byte("label\ttext\nspam\twin a cruise\nspam\tcheap pills\npraise\tlovely crew\npraise\tgreat deck\n"), 0o644)
	code, _, errs = runCmd(t, "", append(append([]string{}, train...), "-o", filepath.Join(dir, "y.safetensors"), "--format", "label-tab-text", ltt)...)
	if code != exitOK || !strings.Contains(errs, ltt+":1: a header line") {
		t.Errorf("label-tab-text header: exit %d: %s", code, errs)
	}
}

var evalRef map[string]any
