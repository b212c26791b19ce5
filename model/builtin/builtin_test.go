package builtin

import (
	"bytes"
	"strings"
	"testing"

	"convtag/model"
)

// TestEncodeReproducesFile: encoding the loaded built-in model gives the
// embedded file byte for byte, so the writer and the reader agree on every
// byte of the container (header spelling, padding, tensor order) and a
// change to either that would alter saved files fails here.
func TestEncodeReproducesFile(t *testing.T) {
	m, err := Open()
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	version, ok := strings.CutPrefix(m.Meta[model.MetaCreatedBy], "convtag ")
	if !ok {
		t.Fatalf("created_by %q does not start with \"convtag \"", m.Meta[model.MetaCreatedBy])
	}
	var buf bytes.Buffer
	if err := m.Encode(&buf, model.SaveOptions{Version: version}); err != nil {
		t.Fatal(err)
	}
	if got, want := buf.Bytes(), Bytes(); !bytes.Equal(got, want) {
		at := 0
		for at < min(len(got), len(want)) && got[at] == want[at] {
			at++
		}
		t.Fatalf("Encode gives %d bytes, the file has %d; first difference at byte %d", len(got), len(want), at)
	}
}
