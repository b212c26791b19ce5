package safetensors

import (
	"encoding/binary"
	"math"
	"slices"
	"testing"
	"unsafe"
)

// TestViews: a view of aligned bytes shares their memory; of bytes at
// every misalignment it is a copy with the same little-endian values
// (the byte order of the format's specification); Bytes undoes it.
func TestViews(t *testing.T) {
	f32 := []float32{1.5, -2, float32(math.Inf(1)), 0}
	i32 := []int32{7, -1, math.MaxInt32, math.MinInt32}
	i64 := []int64{1 << 40, -3}
	u16 := []uint16{0x3c00, 0xffff, 0}
	var raw []byte
	raw, _ = binary.Append(raw, binary.LittleEndian, f32)
	back := make([]uint64, len(raw)/8+2)
	mem := unsafe.Slice((*byte)(unsafe.Pointer(unsafe.SliceData(back))), len(back)*8)
	for shift := range 8 {
		b := mem[shift : shift+len(raw)]
		copy(b, raw)
		v := ViewF32(b)
		if !slices.Equal(v, f32) {
			t.Fatalf("shift %d: %v, want %v", shift, v, f32)
		}
		shared := unsafe.Pointer(&v[0]) == unsafe.Pointer(&b[0])
		if want := littleEndian && shift%4 == 0; shared != want {
			t.Errorf("shift %d: view shares memory %t, want %t", shift, shared, want)
		}
	}
	check := func(name string, got, want any, ok bool) {
		if !ok {
			t.Errorf("%s: %v, want %v", name, got, want)
		}
	}
	for shift := range 8 {
		b := append(make([]byte, shift), Bytes(i32)...)[shift:]
		g := ViewI32(b)
		check("I32", g, i32, slices.Equal(g, i32))
		b = append(make([]byte, shift), Bytes(i64)...)[shift:]
		g64 := ViewI64(b)
		check("I64", g64, i64, slices.Equal(g64, i64))
		b = append(make([]byte, shift), Bytes(u16)...)[shift:]
		g16 := ViewU16(b)
		check("U16", g16, u16, slices.Equal(g16, u16))
	}
	if got := Bytes(f32); !slices.Equal(got, raw) {
		t.Errorf("Bytes(%v) = %v, want %v", f32, got, raw)
	}
	if ViewF32(nil) != nil || ViewF32([]byte{1, 2, 3}) != nil {
		t.Error("a view of fewer bytes than one element is not nil")
	}
	if b := Bytes([]float32{}); b == nil || len(b) != 0 {
		t.Errorf("Bytes of an empty slice = %#v, want empty and non-nil", b)
	}
}
