package model

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"os"
	"runtime"
	"strings"
	"testing"

	"convtag/model/safetensors"
)

// A model that cannot be mapped (a pipe, a device) is read whole, but no
// more than readLimit bytes and one: a model at the limit opens, one byte
// over it and an endless /dev/zero are errors, not a read that never ends.
func TestOpenReadLimit(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("no /dev/fd or /dev/zero")
	}
	var file bytes.Buffer
	if err := stModel(t, 20, 0, "F32").Encode(&file, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	size := int64(file.Len())
	for _, tc := range []struct {
		name    string
		pipe    []byte // fed through a pipe; else path
		path    string
		limit   int64
		wantErr bool
	}{
		{"model at the limit through a pipe", file.Bytes(), "", size, false},
		{"model one byte over the limit through a pipe", file.Bytes(), "", size - 1, true},
		{"endless device of zeros", nil, "/dev/zero", 1 << 20, true},
		{"endless pipe with a plausible header", append(le64(64), make([]byte, 1<<20)...), "", 1 << 16, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			old := readLimit
			readLimit = tc.limit
			defer func() { readLimit = old }()
			path := tc.path
			if tc.pipe != nil {
				r, w, err := os.Pipe()
				if err != nil {
					t.Fatal(err)
				}
				defer r.Close()
				go func() {
					w.Write(tc.pipe) // fails once the reader stops: that is fine
					w.Close()
				}()
				path = fmt.Sprintf("/dev/fd/%d", r.Fd())
			}
			m, err := Open(path)
			if tc.path == "/dev/zero" {
				// Its header length, 0, is refused after 8 bytes, without
				// reading on to the limit.
				if !errors.Is(err, safetensors.ErrHeader) && !errors.Is(err, safetensors.ErrHeaderTooLarge) && !errors.Is(err, safetensors.ErrTooShort) {
					t.Fatalf("err %v, want the container's header error", err)
				}
				return
			}
			if tc.wantErr {
				if err == nil || !strings.Contains(err.Error(), fmt.Sprintf("more than %d bytes", tc.limit)) {
					t.Fatalf("err %v, want more than %d bytes", err, tc.limit)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			defer m.Close()
			if len(m.Labels) != 3 {
				t.Fatalf("labels %v", m.Labels)
			}
		})
	}
}

func le64(n uint64) []byte { return binary.LittleEndian.AppendUint64(nil, n) }
