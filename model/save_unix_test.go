//go:build unix

package model

import (
	"io/fs"
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// A model file gets 0666 less the umask, as other outputs do.
func TestSaveModeFollowsUmask(t *testing.T) {
	tests := []struct {
		umask int
		want  fs.FileMode
	}{
		{0o022, 0o644},
		{0o077, 0o600},
		{0o002, 0o664},
	}
	for _, tt := range tests {
		dir := t.TempDir()
		path := filepath.Join(dir, "m.safetensors")
		old := syscall.Umask(tt.umask)
		err := stModel(t, 5, 0, "").Save(path, SaveOptions{})
		syscall.Umask(old)
		if err != nil {
			t.Fatal(err)
		}
		st, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		if got := st.Mode().Perm(); got != tt.want {
			t.Errorf("umask %03o: mode %03o, want %03o", tt.umask, got, tt.want)
		}
	}
}
