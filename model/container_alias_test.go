package model

import (
	"encoding/binary"

	"convtag/model/safetensors"
)

// Tensor is the container's tensor, under a short name for this package's
// tests, which build many of them.
type Tensor = safetensors.Tensor

// littleEndian is whether Load can view tensors in place on this host.
var littleEndian = func() bool {
	b := safetensors.Bytes([]uint16{1})
	return b[0] == 1
}()

// stRaw builds a container from a header text and a data buffer, with no
// padding, so tests control every byte.
func stRaw(header string, data []byte) []byte {
	b := binary.LittleEndian.AppendUint64(nil, uint64(len(header)))
	b = append(b, header...)
	return append(b, data...)
}

func equalMeta(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}
