package safetensors

import (
	"encoding/binary"
	"math"
	"unsafe"
)

// littleEndian is whether this host stores numbers little-endian, as the
// format does; only then can a tensor's bytes be viewed in place.
var littleEndian = func() bool {
	x := uint16(1)
	return *(*byte)(unsafe.Pointer(&x)) == 1
}()

// aligned reports whether b can be viewed in place as elements of the given
// size: a little-endian host and b's start a multiple of size.
func aligned(b []byte, size uintptr) bool {
	return littleEndian && uintptr(unsafe.Pointer(unsafe.SliceData(b)))%size == 0
}

// ViewF32 returns b, little-endian F32 elements, as []float32: a view of
// b's memory when it is aligned (writing one writes the other), else a
// converted copy. A trailing partial element is ignored; empty b gives nil.
func ViewF32(b []byte) []float32 {
	n := len(b) / 4
	if n == 0 {
		return nil
	}
	if aligned(b, 4) {
		return unsafe.Slice((*float32)(unsafe.Pointer(&b[0])), n)
	}
	v := make([]float32, n)
	for i := range v {
		v[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return v
}

// ViewI32 is ViewF32 for I32 elements.
func ViewI32(b []byte) []int32 {
	n := len(b) / 4
	if n == 0 {
		return nil
	}
	if aligned(b, 4) {
		return unsafe.Slice((*int32)(unsafe.Pointer(&b[0])), n)
	}
	v := make([]int32, n)
	for i := range v {
		v[i] = int32(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return v
}

// ViewI64 is ViewF32 for I64 elements.
func ViewI64(b []byte) []int64 {
	n := len(b) / 8
	if n == 0 {
		return nil
	}
	if aligned(b, 8) {
		return unsafe.Slice((*int64)(unsafe.Pointer(&b[0])), n)
	}
	v := make([]int64, n)
	for i := range v {
		v[i] = int64(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v
}

// ViewU16 is ViewF32 for 2-byte elements (U16, or F16 and BF16 bits).
func ViewU16(b []byte) []uint16 {
	n := len(b) / 2
	if n == 0 {
		return nil
	}
	if aligned(b, 2) {
		return unsafe.Slice((*uint16)(unsafe.Pointer(&b[0])), n)
	}
	v := make([]uint16, n)
	for i := range v {
		v[i] = binary.LittleEndian.Uint16(b[2*i:])
	}
	return v
}

// Bytes gives v's little-endian bytes, for a Tensor's Data: a view of v's
// memory on a little-endian host, a converted copy otherwise. Empty v gives
// an empty, non-nil slice.
func Bytes[T float32 | int32 | int64 | uint16](v []T) []byte {
	if len(v) == 0 {
		return []byte{}
	}
	if littleEndian {
		return unsafe.Slice((*byte)(unsafe.Pointer(&v[0])), len(v)*int(unsafe.Sizeof(v[0])))
	}
	b, _ := binary.Append(nil, binary.LittleEndian, v) // fixed-size elements: cannot fail
	return b
}
