package stream

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"reflect"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the golden files under testdata/")

// golden compares got with testdata/name, or rewrites it under -update.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./stream -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from the golden file:\n got: %q\nwant: %q", name, got, want)
	}
}

// spliceCases are JSON records whose bytes must survive tagging.
var spliceCases = []struct{ name, rec string }{
	{"plain", `{"id":1,"text":"the ferry to Marrowby leaves the harbour at noon"}`},
	{"nested key", `{"msg":{"body":{"text":"fog over the strait, the crossing is late"}},"id":2}`},
	{"unicode escapes", `{"text":"caf\u00e9 on deck \ud83d\ude22 \"wet\"","who":"\u004b\u0069"}`},
	{"huge numbers", `{"text":"ticket for the ferry","n":123456789012345678901234567890,"x":1.0e-400,"y":-0.000}`},
	{"odd spacing", "  {  \"text\" :\t\"wind and swell\"  ,\"k\":[ 1 , 2 ]   }   "},
	{"existing key replaced", `{"tag":"old","text":"storm warning for the harbour","confidence": 0.5 ,"z":0}`},
	{"repeated tag key", `{"tag":1,"text":"rain","tag":[2]}`},
	{"empty object", `{}`},
	{"empty object with space", `{ }`},
	{"trailing spaces", `{"text":"deck chairs"}   `},
	{"crlf", "{\"text\":\"rain on the deck\"}\r"},
	{"crlf and spaces", "{\"text\":\"fog\"} \t\r"},
	{"escaped key", `{"t\u0065xt":"the ferry key is escaped"}`},
	{"string with braces", `{"text":"a } b { c","q":"\\"}`},
}

// testFields are what TestSpliceGolden and FuzzSplice splice in.
var testFields = []field{
	{name: "tag", key: []byte(`"tag"`), val: []byte(`"crossing"`)},
	{name: "confidence", key: []byte(`"confidence"`), val: []byte(`0.9731`)},
}

func TestSpliceGolden(t *testing.T) {
	var s scanner
	var sp splicer
	var g bytes.Buffer
	for _, c := range spliceCases {
		rec := []byte(c.rec)
		if ok, e := s.validObject(rec); !ok {
			t.Fatalf("%s: test record invalid: %+v", c.name, e)
		}
		got := sp.splice(nil, rec, s.members, testFields)
		g.WriteString("# " + c.name + "\n" + c.rec + "\n" + string(got) + "\n")
		t.Run(c.name, func(t *testing.T) { checkSpliced(t, rec, got, "tag", "confidence") })
	}
	golden(t, "splice.golden", g.Bytes())
}

// checkSpliced checks a tagged record against its input with encoding/json
// as the reference: the output is valid JSON, the input's other members
// decode to the same values, the added keys hold a tag and a confidence,
// and when no key was replaced the input's bytes are all there, in order,
// around one inserted run.
func checkSpliced(t *testing.T, in, out []byte, tagKey, confKey string) {
	t.Helper()
	trimCR := func(b []byte) []byte { return bytes.TrimSuffix(b, []byte("\r")) }
	if bytes.HasSuffix(in, []byte("\r")) != bytes.HasSuffix(out, []byte("\r")) {
		t.Errorf("CR not kept at the end: %q -> %q", in, out)
	}
	if !json.Valid(trimCR(in)) {
		// Nested deeper than encoding/json goes (10,000 levels): only our
		// own scanner can check it.
		var s scanner
		if ok, _ := s.validObject(out); !ok {
			t.Fatalf("not valid JSON: %.200q", out)
		}
		return
	}
	if !json.Valid(trimCR(out)) {
		t.Fatalf("not valid JSON: %.200q", out)
	}
	var before, after map[string]any
	dec := func(b []byte, v *map[string]any) {
		d := json.NewDecoder(bytes.NewReader(b))
		d.UseNumber()
		if err := d.Decode(v); err != nil {
			t.Fatalf("%q: %v", b, err)
		}
	}
	dec(trimCR(in), &before)
	dec(trimCR(out), &after)
	tag, ok := after[tagKey].(string)
	if !ok || tag == "" {
		t.Errorf("no tag in %.200q", out)
	}
	conf, ok := after[confKey].(json.Number)
	if f, err := conf.Float64(); !ok || err != nil || f < 0 || f > 1 || len(conf) != 6 {
		t.Errorf("confidence %q in %.200q: want 4 decimals in [0,1]", conf, out)
	}
	delete(before, tagKey)
	delete(before, confKey)
	delete(after, tagKey)
	delete(after, confKey)
	if !reflect.DeepEqual(before, after) {
		t.Errorf("members changed:\n%v\n%v", before, after)
	}
	if !bytes.Contains(in, []byte(`"`+tagKey+`"`)) && !bytes.Contains(in, []byte(`"`+confKey+`"`)) {
		p := 0
		for p < len(in) && in[p] == out[p] {
			p++
		}
		s := 0
		for s < len(in)-p && in[len(in)-1-s] == out[len(out)-1-s] {
			s++
		}
		if p+s != len(in) {
			t.Errorf("input bytes not kept around one insertion: %.200q -> %.200q", in, out)
		}
	}
}

func FuzzSplice(f *testing.F) {
	for _, c := range spliceCases {
		f.Add([]byte(c.rec))
	}
	var s scanner
	var sp splicer
	fields := testFields
	f.Fuzz(func(t *testing.T, rec []byte) {
		if ok, _ := s.validObject(rec); !ok {
			return
		}
		out := sp.splice(nil, rec, s.members, fields)
		if ok, e := s.validObject(out); !ok {
			t.Fatalf("%q -> %q: invalid (%+v)", rec, out, e)
		}
		if !json.Valid(out) && json.Valid(rec) {
			t.Fatalf("%q -> %q: encoding/json rejects the output", rec, out)
		}
		var m map[string]json.RawMessage
		if json.Unmarshal(out, &m) == nil && json.Valid(rec) {
			if string(m["tag"]) != `"crossing"` || string(m["confidence"]) != "0.9731" {
				t.Fatalf("%q -> %q: fields not set", rec, out)
			}
		}
		if !bytes.Contains(rec, []byte(`"tag"`)) && !bytes.Contains(rec, []byte(`"confidence"`)) && !bytes.Contains(rec, []byte(`\u`)) {
			p := 0
			for p < len(rec) && rec[p] == out[p] {
				p++
			}
			s := 0
			for s < len(rec)-p && rec[len(rec)-1-s] == out[len(out)-1-s] {
				s++
			}
			if p+s != len(rec) {
				t.Fatalf("bytes not kept: %q -> %q", rec, out)
			}
		}
	})
}
