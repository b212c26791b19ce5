package stream

import (
	"bytes"
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// compressWith compresses data with the system's own tool (gzip, zstd,
// bzip2: the reference implementations of each format) into dir/name.
// Under CI=true a missing tool is a failure, elsewhere a skip.
func compressWith(t *testing.T, tool string, data []byte, path string) {
	t.Helper()
	if _, err := exec.LookPath(tool); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s is needed as the reference compressor: %v", tool, err)
		}
		t.Skipf("%s not installed", tool)
	}
	args := []string{"-c"}
	switch tool {
	case "zstd":
		args = append(args, "-q")
	case "bzip2":
		args = append(args, "-1") // 100 kB blocks, so a cut file still has whole ones
	}
	cmd := exec.Command(tool, args...)
	cmd.Stdin = bytes.NewReader(data)
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("%s: %v", tool, err)
	}
	if err := os.WriteFile(path, out, 0o644); err != nil {
		t.Fatal(err)
	}
}

func runFiles(t *testing.T, opts Options, files ...string) (string, Stats, []error) {
	t.Helper()
	opts.Tagger = newKeywordTagger()
	var errs []error
	opts.OnError = func(err error) { errs = append(errs, err) }
	var out bytes.Buffer
	st, err := Run(context.Background(), opts, files, nil, &out)
	if err != nil {
		errs = append(errs, err)
	}
	return out.String(), st, errs
}

// Compressed input, sniffed from its bytes whatever the file is called,
// several files in a row, gives the output of the same bytes uncompressed.
func TestCompressedInputsInARow(t *testing.T) {
	dir := t.TempDir()
	parts := []string{chatLog(3000, 11), chatLog(2000, 12), chatLog(1000, 13), "ferry without newline"}
	plain := filepath.Join(dir, "all.txt")
	all := strings.Join(parts[:3], "") + parts[3] + "\n"
	os.WriteFile(plain, []byte(all), 0o644)
	want, _, werrs := runFiles(t, Options{}, plain)
	var files []string
	for i, tool := range []string{"gzip", "zstd", "bzip2"} {
		p := filepath.Join(dir, "part"+string(rune('a'+i))+".log") // no telling suffix
		compressWith(t, tool, []byte(parts[i]), p)
		files = append(files, p)
	}
	last := filepath.Join(dir, "last.txt")
	os.WriteFile(last, []byte(parts[3]), 0o644)
	files = append(files, last)
	got, st, errs := runFiles(t, Options{Jobs: 2, BlockSize: 4096}, files...)
	if got != want {
		t.Errorf("compressed inputs: %d bytes out, plain gives %d", len(got), len(want))
	}
	if len(errs) != len(werrs) {
		t.Errorf("%d problems, plain gives %d", len(errs), len(werrs))
	}
	if st.Records != int64(strings.Count(all, "\n")) {
		t.Errorf("%d records, want %d", st.Records, strings.Count(all, "\n"))
	}
	// Problems name the file and the line within it.
	for _, e := range errs {
		var re *RecordError
		if errors.As(e, &re) && !strings.HasPrefix(re.File, dir) {
			t.Errorf("problem without its file: %v", e)
		}
	}
}

// A compressed file cut short: every whole line before the cut is written,
// then one error naming the file; the next input is still read.
func TestTruncatedCompressedInput(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	rec := `{"text":"the ferry is late"}`
	for range 20000 {
		b.WriteString(rec + "\n")
	}
	tagged, _, _ := runString(t, Options{}, rec+"\nfog\n")
	wantRec, wantFog, _ := strings.Cut(strings.TrimSuffix(tagged, "\n"), "\n")
	data := b.String()
	after := filepath.Join(dir, "after.txt")
	os.WriteFile(after, []byte("fog\n"), 0o644)
	for _, tool := range []string{"gzip", "zstd", "bzip2"} {
		t.Run(tool, func(t *testing.T) {
			p := filepath.Join(dir, "cut."+tool)
			compressWith(t, tool, []byte(data), p)
			full, _ := os.ReadFile(p)
			os.WriteFile(p, full[:len(full)*2/3], 0o644)
			out, st, errs := runFiles(t, Options{}, p, after)
			var ie *InputError
			if len(errs) < 1 || !errors.As(errs[len(errs)-1], &ie) || ie.File != p || !errors.Is(ie, ErrTruncated) {
				t.Fatalf("errors %v: want one naming %s", errs, p)
			}
			if strings.Contains(ie.Error(), "\n") {
				t.Errorf("error is not one line: %q", ie)
			}
			lines := strings.Split(out, "\n")
			if len(lines) < 3 || lines[len(lines)-2] != wantFog {
				t.Fatalf("the next input was not read: %.100q", out[max(0, len(out)-100):])
			}
			for i, l := range lines[:len(lines)-2] {
				if l != wantRec {
					t.Fatalf("line %d is not a whole tagged record: %q", i+1, l)
				}
			}
			if n := int64(len(lines) - 2); ie.Line != n || n < 1000 || st.Records != n+1 {
				t.Errorf("%d whole lines written, error says after %d, %d records", n, ie.Line, st.Records)
			}
		})
	}
}

func TestMissingInput(t *testing.T) {
	dir := t.TempDir()
	ok := filepath.Join(dir, "ok.txt")
	os.WriteFile(ok, []byte("ferry\n"), 0o644)
	out, _, errs := runFiles(t, Options{}, filepath.Join(dir, "nope.txt"), ok)
	var ie *InputError
	if len(errs) != 2 || !errors.As(errs[0], &ie) || !errors.Is(errs[0], os.ErrNotExist) || !strings.Contains(out, "ferry") {
		t.Fatalf("out %q, errors %v", out, errs)
	}
}
