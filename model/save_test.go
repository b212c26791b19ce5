package model

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// failingWriter passes the first n bytes on, then fails the write (or
// panics, as a bug in the encoder would).
type failingWriter struct {
	w     io.Writer
	n     int
	panic bool
}

var errDiskFull = errors.New("test: no space left on device")

func (w *failingWriter) Write(p []byte) (int, error) {
	if len(p) <= w.n {
		w.n -= len(p)
		return w.w.Write(p)
	}
	if w.panic {
		panic(errDiskFull)
	}
	k, _ := w.w.Write(p[:w.n])
	w.n = 0
	return k, errDiskFull
}

// A save that fails midway leaves no temporary file behind and the
// previous model in place, whether the write returns an error or panics.
func TestSaveFailedWriteLeavesNoTemp(t *testing.T) {
	tests := []struct {
		name  string
		after int // bytes written before the failure
		panic bool
	}{
		{name: "error at once", after: 0},
		{name: "error midway", after: 3000},
		{name: "panic midway", after: 3000, panic: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "m.safetensors")
			old := stModel(t, 10, 0, "")
			if err := old.Save(path, SaveOptions{}); err != nil {
				t.Fatal(err)
			}
			before, _ := os.ReadFile(path)
			defer func(w func(*os.File) io.Writer) { saveWriter = w }(saveWriter)
			saveWriter = func(f *os.File) io.Writer { return &failingWriter{w: f, n: tt.after, panic: tt.panic} }
			err := func() (err error) {
				defer func() {
					if r := recover(); r != nil {
						err = r.(error)
					}
				}()
				return stModel(t, 400, 2, "F32").Save(path, SaveOptions{})
			}()
			if !errors.Is(err, errDiskFull) {
				t.Fatalf("save: %v, want the write's error", err)
			}
			ents, _ := os.ReadDir(dir)
			if len(ents) != 1 || ents[0].Name() != "m.safetensors" {
				var names []string
				for _, e := range ents {
					names = append(names, e.Name())
				}
				t.Errorf("directory holds %q, want only m.safetensors", names)
			}
			if after, _ := os.ReadFile(path); string(after) != string(before) {
				t.Error("the previous model was changed")
			}
		})
	}
}
