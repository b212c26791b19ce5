package plots

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"slices"
	"syscall"
	"testing"
)

// fullDisk accepts n bytes, then fails every write with ENOSPC, as a write
// to a full file system does.
type fullDisk struct {
	w io.Writer
	n int
}

func (d *fullDisk) Write(p []byte) (int, error) {
	if len(p) <= d.n {
		d.n -= len(p)
		return d.w.Write(p)
	}
	k, _ := d.w.Write(p[:d.n])
	d.n = 0
	return k, syscall.ENOSPC
}

// TestWriteAllFullDisk: when writing a figure fails part-way, WriteAll
// reports the error and leaves no partial figure and no temporary file;
// the figures written before stay complete.
func TestWriteAllFullDisk(t *testing.T) {
	s := set(t)
	for _, c := range []struct {
		name string
		ext  string
		// room is how many bytes the disk takes per figure file, in order;
		// the figure with a limit fails.
		room []int
		// written are the figures that must exist afterwards.
		written []string
	}{
		{"png, nothing fits", "png", []int{0}, nil},
		{"png, part of the first", "png", []int{100}, nil},
		{"svg, part of the first", "svg", []int{100}, nil},
		{"png, the second fails", "png", []int{-1, 4000}, []string{"confusion.png"}},
		{"svg, the third fails", "svg", []int{-1, -1, 2000}, []string{"confusion.svg", "reliability.svg"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			i := 0
			wrapOutput = func(w io.Writer) io.Writer {
				defer func() { i++ }()
				if i < len(c.room) && c.room[i] >= 0 {
					return &fullDisk{w: w, n: c.room[i]}
				}
				return w
			}
			defer func() { wrapOutput = func(w io.Writer) io.Writer { return w } }()
			files, err := WriteAll(dir, c.ext, s)
			if !errors.Is(err, syscall.ENOSPC) {
				t.Fatalf("WriteAll: %v, want ENOSPC", err)
			}
			ents, err := os.ReadDir(dir)
			if err != nil {
				t.Fatal(err)
			}
			var names []string
			for _, e := range ents {
				names = append(names, e.Name())
				info, err := e.Info()
				if err != nil || info.Size() == 0 {
					t.Errorf("%s: empty file (%v)", e.Name(), err)
				}
			}
			if !slices.Equal(names, c.written) {
				t.Errorf("directory holds %q, want %q", names, c.written)
			}
			var want []string
			for _, n := range c.written {
				want = append(want, filepath.Join(dir, n))
			}
			if !slices.Equal(files, want) {
				t.Errorf("WriteAll reported %q, want %q", files, want)
			}
		})
	}
}
