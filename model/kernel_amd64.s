//go:build !purego

#include "textflag.h"

// Folded convolution kernels. Each processes one chunk of columns (4 or 1
// vectors of filters) of one width's table for a whole text:
//
//	func foldXXX(tab *T, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
//
// tab, bias, mx and win point at the chunk's first column; rowBytes is the
// byte size of one row's w taps, tapBytes of one tap. For each position p
// the taps k < min(w, n-p) are added to the bias in order (as the generic
// code does, so results are bit-identical), then the running maximum and
// its first position are kept with a strict greater-than against a start of
// 0 and -1, which is ReLU and max-over-time in one step.
//
// Registers: DI table chunk base, R8 rows, BX n, R9 w, R10 rowBytes,
// R11 tapBytes, CX position, DX taps left, SI &rows[p+k], R12 tap base,
// AX row byte offset.

#define FOLD_ARGS \
	MOVQ tab+0(FP), DI; \
	MOVQ rows+8(FP), R8; \
	MOVQ n+16(FP), BX; \
	MOVQ w+24(FP), R9; \
	MOVQ rowBytes+32(FP), R10; \
	MOVQ tapBytes+40(FP), R11; \
	MOVQ bias+48(FP), R13

// DX = min(n-p, w); SI = &rows[p]; R12 = tab chunk for tap 0.
#define POS_SETUP \
	MOVQ BX, DX; \
	SUBQ CX, DX; \
	CMPQ DX, R9; \
	CMOVQGT R9, DX; \
	LEAQ (R8)(CX*4), SI; \
	MOVQ DI, R12

#define TAP_ROW \
	MOVL (SI), AX; \
	IMULQ R10, AX

#define TAP_NEXT \
	ADDQ $4, SI; \
	ADDQ R11, R12; \
	DECQ DX

// ---- AVX-512: Z0-Z3 sums, Z4-Z7 maxima, Z8-Z11 winners, Z12 position,
// Z13 ones, Z14-Z17 bias, Z20-Z23 widened halves.

#define Z_START \
	VPXORD Z4, Z4, Z4; \
	VPXORD Z5, Z5, Z5; \
	VPXORD Z6, Z6, Z6; \
	VPXORD Z7, Z7, Z7; \
	VPTERNLOGD $0xff, Z8, Z8, Z8; \
	VPTERNLOGD $0xff, Z9, Z9, Z9; \
	VPTERNLOGD $0xff, Z10, Z10, Z10; \
	VPTERNLOGD $0xff, Z11, Z11, Z11; \
	VPXORD Z12, Z12, Z12; \
	MOVL $1, AX; \
	VPBROADCASTD AX, Z13; \
	XORQ CX, CX

#define Z_UPD(acc, mx, win, k) \
	VCMPPS $0x1e, mx, acc, k; \
	VMOVAPS acc, k, mx; \
	VMOVDQA32 Z12, k, win

#define Z_STORE4 \
	MOVQ mx+56(FP), AX; \
	VMOVUPS Z4, 0(AX); \
	VMOVUPS Z5, 64(AX); \
	VMOVUPS Z6, 128(AX); \
	VMOVUPS Z7, 192(AX); \
	MOVQ win+64(FP), AX; \
	VMOVDQU32 Z8, 0(AX); \
	VMOVDQU32 Z9, 64(AX); \
	VMOVDQU32 Z10, 128(AX); \
	VMOVDQU32 Z11, 192(AX)

#define Z_STORE1 \
	MOVQ mx+56(FP), AX; \
	VMOVUPS Z4, 0(AX); \
	MOVQ win+64(FP), AX; \
	VMOVDQU32 Z8, 0(AX)

// func foldF32AVX512x4(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF32AVX512x4(SB), NOSPLIT, $0-72
	FOLD_ARGS
	VMOVUPS 0(R13), Z14
	VMOVUPS 64(R13), Z15
	VMOVUPS 128(R13), Z16
	VMOVUPS 192(R13), Z17
	Z_START

f32z4pos:
	POS_SETUP
	VMOVAPS Z14, Z0
	VMOVAPS Z15, Z1
	VMOVAPS Z16, Z2
	VMOVAPS Z17, Z3

f32z4tap:
	TAP_ROW
	VADDPS 0(R12)(AX*1), Z0, Z0
	VADDPS 64(R12)(AX*1), Z1, Z1
	VADDPS 128(R12)(AX*1), Z2, Z2
	VADDPS 192(R12)(AX*1), Z3, Z3
	TAP_NEXT
	JNZ f32z4tap

	Z_UPD(Z0, Z4, Z8, K1)
	Z_UPD(Z1, Z5, Z9, K2)
	Z_UPD(Z2, Z6, Z10, K3)
	Z_UPD(Z3, Z7, Z11, K4)
	VPADDD Z13, Z12, Z12
	INCQ CX
	CMPQ CX, BX
	JLT f32z4pos

	Z_STORE4
	VZEROUPPER
	RET

// func foldF32AVX512x1(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF32AVX512x1(SB), NOSPLIT, $0-72
	FOLD_ARGS
	VMOVUPS 0(R13), Z14
	Z_START

f32z1pos:
	POS_SETUP
	VMOVAPS Z14, Z0

f32z1tap:
	TAP_ROW
	VADDPS 0(R12)(AX*1), Z0, Z0
	TAP_NEXT
	JNZ f32z1tap

	Z_UPD(Z0, Z4, Z8, K1)
	VPADDD Z13, Z12, Z12
	INCQ CX
	CMPQ CX, BX
	JLT f32z1pos

	Z_STORE1
	VZEROUPPER
	RET

// func foldF16AVX512x4(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF16AVX512x4(SB), NOSPLIT, $0-72
	FOLD_ARGS
	VMOVUPS 0(R13), Z14
	VMOVUPS 64(R13), Z15
	VMOVUPS 128(R13), Z16
	VMOVUPS 192(R13), Z17
	Z_START

f16z4pos:
	POS_SETUP
	VMOVAPS Z14, Z0
	VMOVAPS Z15, Z1
	VMOVAPS Z16, Z2
	VMOVAPS Z17, Z3

f16z4tap:
	TAP_ROW
	VCVTPH2PS 0(R12)(AX*1), Z20
	VCVTPH2PS 32(R12)(AX*1), Z21
	VCVTPH2PS 64(R12)(AX*1), Z22
	VCVTPH2PS 96(R12)(AX*1), Z23
	VADDPS Z20, Z0, Z0
	VADDPS Z21, Z1, Z1
	VADDPS Z22, Z2, Z2
	VADDPS Z23, Z3, Z3
	TAP_NEXT
	JNZ f16z4tap

	Z_UPD(Z0, Z4, Z8, K1)
	Z_UPD(Z1, Z5, Z9, K2)
	Z_UPD(Z2, Z6, Z10, K3)
	Z_UPD(Z3, Z7, Z11, K4)
	VPADDD Z13, Z12, Z12
	INCQ CX
	CMPQ CX, BX
	JLT f16z4pos

	Z_STORE4
	VZEROUPPER
	RET

// func foldF16AVX512x1(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF16AVX512x1(SB), NOSPLIT, $0-72
	FOLD_ARGS
	VMOVUPS 0(R13), Z14
	Z_START

f16z1pos:
	POS_SETUP
	VMOVAPS Z14, Z0

f16z1tap:
	TAP_ROW
	VCVTPH2PS 0(R12)(AX*1), Z20
	VADDPS Z20, Z0, Z0
	TAP_NEXT
	JNZ f16z1tap

	Z_UPD(Z0, Z4, Z8, K1)
	VPADDD Z13, Z12, Z12
	INCQ CX
	CMPQ CX, BX
	JLT f16z1pos

	Z_STORE1
	VZEROUPPER
	RET

// ---- AVX2: Y0-Y3 sums, Y4-Y7 maxima, Y8-Y11 winners, Y12 position,
// Y13 ones, Y14 widened halves, Y15 compare mask; bias read from R13.

#define Y_START \
	VXORPS Y4, Y4, Y4; \
	VXORPS Y5, Y5, Y5; \
	VXORPS Y6, Y6, Y6; \
	VXORPS Y7, Y7, Y7; \
	VPCMPEQD Y8, Y8, Y8; \
	VPCMPEQD Y9, Y9, Y9; \
	VPCMPEQD Y10, Y10, Y10; \
	VPCMPEQD Y11, Y11, Y11; \
	VPXOR Y12, Y12, Y12; \
	MOVL $1, AX; \
	MOVQ AX, X13; \
	VPBROADCASTD X13, Y13; \
	XORQ CX, CX

#define Y_UPD(acc, mx, win) \
	VCMPPS $0x1e, mx, acc, Y15; \
	VBLENDVPS Y15, acc, mx, mx; \
	VBLENDVPS Y15, Y12, win, win

#define Y_STORE4 \
	MOVQ mx+56(FP), AX; \
	VMOVUPS Y4, 0(AX); \
	VMOVUPS Y5, 32(AX); \
	VMOVUPS Y6, 64(AX); \
	VMOVUPS Y7, 96(AX); \
	MOVQ win+64(FP), AX; \
	VMOVDQU Y8, 0(AX); \
	VMOVDQU Y9, 32(AX); \
	VMOVDQU Y10, 64(AX); \
	VMOVDQU Y11, 96(AX)

#define Y_STORE1 \
	MOVQ mx+56(FP), AX; \
	VMOVUPS Y4, 0(AX); \
	MOVQ win+64(FP), AX; \
	VMOVDQU Y8, 0(AX)

// func foldF32AVX2x4(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF32AVX2x4(SB), NOSPLIT, $0-72
	FOLD_ARGS
	Y_START

f32y4pos:
	POS_SETUP
	VMOVUPS 0(R13), Y0
	VMOVUPS 32(R13), Y1
	VMOVUPS 64(R13), Y2
	VMOVUPS 96(R13), Y3

f32y4tap:
	TAP_ROW
	VADDPS 0(R12)(AX*1), Y0, Y0
	VADDPS 32(R12)(AX*1), Y1, Y1
	VADDPS 64(R12)(AX*1), Y2, Y2
	VADDPS 96(R12)(AX*1), Y3, Y3
	TAP_NEXT
	JNZ f32y4tap

	Y_UPD(Y0, Y4, Y8)
	Y_UPD(Y1, Y5, Y9)
	Y_UPD(Y2, Y6, Y10)
	Y_UPD(Y3, Y7, Y11)
	VPADDD Y13, Y12, Y12
	INCQ CX
	CMPQ CX, BX
	JLT f32y4pos

	Y_STORE4
	VZEROUPPER
	RET

// func foldF32AVX2x1(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF32AVX2x1(SB), NOSPLIT, $0-72
	FOLD_ARGS
	Y_START

f32y1pos:
	POS_SETUP
	VMOVUPS 0(R13), Y0

f32y1tap:
	TAP_ROW
	VADDPS 0(R12)(AX*1), Y0, Y0
	TAP_NEXT
	JNZ f32y1tap

	Y_UPD(Y0, Y4, Y8)
	VPADDD Y13, Y12, Y12
	INCQ CX
	CMPQ CX, BX
	JLT f32y1pos

	Y_STORE1
	VZEROUPPER
	RET

// func foldF16AVX2x4(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF16AVX2x4(SB), NOSPLIT, $0-72
	FOLD_ARGS
	Y_START

f16y4pos:
	POS_SETUP
	VMOVUPS 0(R13), Y0
	VMOVUPS 32(R13), Y1
	VMOVUPS 64(R13), Y2
	VMOVUPS 96(R13), Y3

f16y4tap:
	TAP_ROW
	VCVTPH2PS 0(R12)(AX*1), Y14
	VADDPS Y14, Y0, Y0
	VCVTPH2PS 16(R12)(AX*1), Y14
	VADDPS Y14, Y1, Y1
	VCVTPH2PS 32(R12)(AX*1), Y14
	VADDPS Y14, Y2, Y2
	VCVTPH2PS 48(R12)(AX*1), Y14
	VADDPS Y14, Y3, Y3
	TAP_NEXT
	JNZ f16y4tap

	Y_UPD(Y0, Y4, Y8)
	Y_UPD(Y1, Y5, Y9)
	Y_UPD(Y2, Y6, Y10)
	Y_UPD(Y3, Y7, Y11)
	VPADDD Y13, Y12, Y12
	INCQ CX
	CMPQ CX, BX
	JLT f16y4pos

	Y_STORE4
	VZEROUPPER
	RET

// func foldF16AVX2x1(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32)
TEXT ·foldF16AVX2x1(SB), NOSPLIT, $0-72
	FOLD_ARGS
	Y_START

f16y1pos:
	POS_SETUP
	VMOVUPS 0(R13), Y0

f16y1tap:
	TAP_ROW
	VCVTPH2PS 0(R12)(AX*1), Y14
	VADDPS Y14, Y0, Y0
	TAP_NEXT
	JNZ f16y1tap

	Y_UPD(Y0, Y4, Y8)
	VPADDD Y13, Y12, Y12
	INCQ CX
	CMPQ CX, BX
	JLT f16y1pos

	Y_STORE1
	VZEROUPPER
	RET

// ---- Dot products (FMA). Sums are kept in several vector accumulators
// and added at the end, so they differ from a sequential sum by rounding.

// Horizontal sum of a zmm into lane 0 of its xmm.
#define HSUM_Z(z, y, x, ty, tx) \
	VEXTRACTF64X4 $1, z, ty; \
	VADDPS ty, y, y; \
	HSUM_Y(y, x, tx)

#define HSUM_Y(y, x, tx) \
	VEXTRACTF128 $1, y, tx; \
	VADDPS tx, x, x; \
	VMOVHLPS x, x, tx; \
	VADDPS tx, x, x; \
	VPSHUFD $1, x, tx; \
	VADDSS tx, x, x

// func dotAVX512(a, b *float32, n int) float32
TEXT ·dotAVX512(SB), NOSPLIT, $0-28
	MOVQ a+0(FP), SI
	MOVQ b+8(FP), DI
	MOVQ n+16(FP), CX
	VPXORD Z0, Z0, Z0
	VPXORD Z1, Z1, Z1
	VPXORD Z2, Z2, Z2
	VPXORD Z3, Z3, Z3

dz64:
	CMPQ CX, $64
	JLT dz16
	VMOVUPS 0(SI), Z4
	VMOVUPS 64(SI), Z5
	VMOVUPS 128(SI), Z6
	VMOVUPS 192(SI), Z7
	VFMADD231PS 0(DI), Z4, Z0
	VFMADD231PS 64(DI), Z5, Z1
	VFMADD231PS 128(DI), Z6, Z2
	VFMADD231PS 192(DI), Z7, Z3
	ADDQ $256, SI
	ADDQ $256, DI
	SUBQ $64, CX
	JMP dz64

dz16:
	CMPQ CX, $16
	JLT dztail
	VMOVUPS 0(SI), Z4
	VFMADD231PS 0(DI), Z4, Z0
	ADDQ $64, SI
	ADDQ $64, DI
	SUBQ $16, CX
	JMP dz16

dztail:
	TESTQ CX, CX
	JZ dzsum
	MOVL $1, AX
	SHLL CX, AX
	DECL AX
	KMOVW AX, K1
	VMOVUPS.Z 0(SI), K1, Z4
	VMOVUPS.Z 0(DI), K1, Z5
	VFMADD231PS Z5, Z4, Z1

dzsum:
	VADDPS Z1, Z0, Z0
	VADDPS Z3, Z2, Z2
	VADDPS Z2, Z0, Z0
	HSUM_Z(Z0, Y0, X0, Y1, X1)
	VMOVSS X0, ret+24(FP)
	VZEROUPPER
	RET

// func dot4AVX512(a, x *float32, stride, n int, out *[4]float32)
TEXT ·dot4AVX512(SB), NOSPLIT, $0-40
	MOVQ a+0(FP), SI
	MOVQ x+8(FP), DI
	MOVQ stride+16(FP), R8
	SHLQ $2, R8
	LEAQ (DI)(R8*1), R9
	LEAQ (R9)(R8*1), R10
	LEAQ (R10)(R8*1), R11
	MOVQ n+24(FP), CX
	VPXORD Z0, Z0, Z0
	VPXORD Z1, Z1, Z1
	VPXORD Z2, Z2, Z2
	VPXORD Z3, Z3, Z3
	VPXORD Z4, Z4, Z4
	VPXORD Z5, Z5, Z5
	VPXORD Z6, Z6, Z6
	VPXORD Z7, Z7, Z7

qz32:
	CMPQ CX, $32
	JLT qz16
	VMOVUPS 0(SI), Z8
	VMOVUPS 64(SI), Z9
	VFMADD231PS 0(DI), Z8, Z0
	VFMADD231PS 0(R9), Z8, Z1
	VFMADD231PS 0(R10), Z8, Z2
	VFMADD231PS 0(R11), Z8, Z3
	VFMADD231PS 64(DI), Z9, Z4
	VFMADD231PS 64(R9), Z9, Z5
	VFMADD231PS 64(R10), Z9, Z6
	VFMADD231PS 64(R11), Z9, Z7
	ADDQ $128, SI
	ADDQ $128, DI
	ADDQ $128, R9
	ADDQ $128, R10
	ADDQ $128, R11
	SUBQ $32, CX
	JMP qz32

qz16:
	CMPQ CX, $16
	JLT qztail
	VMOVUPS 0(SI), Z8
	VFMADD231PS 0(DI), Z8, Z0
	VFMADD231PS 0(R9), Z8, Z1
	VFMADD231PS 0(R10), Z8, Z2
	VFMADD231PS 0(R11), Z8, Z3
	ADDQ $64, SI
	ADDQ $64, DI
	ADDQ $64, R9
	ADDQ $64, R10
	ADDQ $64, R11
	SUBQ $16, CX

qztail:
	TESTQ CX, CX
	JZ qzsum
	MOVL $1, AX
	SHLL CX, AX
	DECL AX
	KMOVW AX, K1
	VMOVUPS.Z 0(SI), K1, Z8
	VMOVUPS.Z 0(DI), K1, Z9
	VFMADD231PS Z9, Z8, Z4
	VMOVUPS.Z 0(R9), K1, Z9
	VFMADD231PS Z9, Z8, Z5
	VMOVUPS.Z 0(R10), K1, Z9
	VFMADD231PS Z9, Z8, Z6
	VMOVUPS.Z 0(R11), K1, Z9
	VFMADD231PS Z9, Z8, Z7

qzsum:
	VADDPS Z4, Z0, Z0
	VADDPS Z5, Z1, Z1
	VADDPS Z6, Z2, Z2
	VADDPS Z7, Z3, Z3
	MOVQ out+32(FP), DX
	HSUM_Z(Z0, Y0, X0, Y8, X8)
	VMOVSS X0, 0(DX)
	HSUM_Z(Z1, Y1, X1, Y8, X8)
	VMOVSS X1, 4(DX)
	HSUM_Z(Z2, Y2, X2, Y8, X8)
	VMOVSS X2, 8(DX)
	HSUM_Z(Z3, Y3, X3, Y8, X8)
	VMOVSS X3, 12(DX)
	VZEROUPPER
	RET

// func dotAVX2(a, b *float32, n int) float32
TEXT ·dotAVX2(SB), NOSPLIT, $0-28
	MOVQ a+0(FP), SI
	MOVQ b+8(FP), DI
	MOVQ n+16(FP), CX
	VXORPS Y0, Y0, Y0
	VXORPS Y1, Y1, Y1
	VXORPS Y2, Y2, Y2
	VXORPS Y3, Y3, Y3

dy32:
	CMPQ CX, $32
	JLT dy8
	VMOVUPS 0(SI), Y4
	VMOVUPS 32(SI), Y5
	VMOVUPS 64(SI), Y6
	VMOVUPS 96(SI), Y7
	VFMADD231PS 0(DI), Y4, Y0
	VFMADD231PS 32(DI), Y5, Y1
	VFMADD231PS 64(DI), Y6, Y2
	VFMADD231PS 96(DI), Y7, Y3
	ADDQ $128, SI
	ADDQ $128, DI
	SUBQ $32, CX
	JMP dy32

dy8:
	CMPQ CX, $8
	JLT dysum
	VMOVUPS 0(SI), Y4
	VFMADD231PS 0(DI), Y4, Y0
	ADDQ $32, SI
	ADDQ $32, DI
	SUBQ $8, CX
	JMP dy8

dysum:
	VADDPS Y1, Y0, Y0
	VADDPS Y3, Y2, Y2
	VADDPS Y2, Y0, Y0
	HSUM_Y(Y0, X0, X1)

	// Scalar tail; VEX.128 ops clear the upper lanes, which are spent.
dytail:
	TESTQ CX, CX
	JZ dydone
	VMOVSS 0(SI), X4
	VFMADD231SS 0(DI), X4, X0
	ADDQ $4, SI
	ADDQ $4, DI
	DECQ CX
	JMP dytail

dydone:
	VMOVSS X0, ret+24(FP)
	VZEROUPPER
	RET

// func dot4AVX2(a, x *float32, stride, n int, out *[4]float32)
TEXT ·dot4AVX2(SB), NOSPLIT, $0-40
	MOVQ a+0(FP), SI
	MOVQ x+8(FP), DI
	MOVQ stride+16(FP), R8
	SHLQ $2, R8
	LEAQ (DI)(R8*1), R9
	LEAQ (R9)(R8*1), R10
	LEAQ (R10)(R8*1), R11
	MOVQ n+24(FP), CX
	VXORPS Y0, Y0, Y0
	VXORPS Y1, Y1, Y1
	VXORPS Y2, Y2, Y2
	VXORPS Y3, Y3, Y3
	VXORPS Y4, Y4, Y4
	VXORPS Y5, Y5, Y5
	VXORPS Y6, Y6, Y6
	VXORPS Y7, Y7, Y7

qy16:
	CMPQ CX, $16
	JLT qy8
	VMOVUPS 0(SI), Y8
	VMOVUPS 32(SI), Y9
	VFMADD231PS 0(DI), Y8, Y0
	VFMADD231PS 0(R9), Y8, Y1
	VFMADD231PS 0(R10), Y8, Y2
	VFMADD231PS 0(R11), Y8, Y3
	VFMADD231PS 32(DI), Y9, Y4
	VFMADD231PS 32(R9), Y9, Y5
	VFMADD231PS 32(R10), Y9, Y6
	VFMADD231PS 32(R11), Y9, Y7
	ADDQ $64, SI
	ADDQ $64, DI
	ADDQ $64, R9
	ADDQ $64, R10
	ADDQ $64, R11
	SUBQ $16, CX
	JMP qy16

qy8:
	CMPQ CX, $8
	JLT qysum
	VMOVUPS 0(SI), Y8
	VFMADD231PS 0(DI), Y8, Y0
	VFMADD231PS 0(R9), Y8, Y1
	VFMADD231PS 0(R10), Y8, Y2
	VFMADD231PS 0(R11), Y8, Y3
	ADDQ $32, SI
	ADDQ $32, DI
	ADDQ $32, R9
	ADDQ $32, R10
	ADDQ $32, R11
	SUBQ $8, CX

qysum:
	VADDPS Y4, Y0, Y0
	VADDPS Y5, Y1, Y1
	VADDPS Y6, Y2, Y2
	VADDPS Y7, Y3, Y3
	HSUM_Y(Y0, X0, X8)
	HSUM_Y(Y1, X1, X8)
	HSUM_Y(Y2, X2, X8)
	HSUM_Y(Y3, X3, X8)

qytail:
	TESTQ CX, CX
	JZ qydone
	VMOVSS 0(SI), X8
	VFMADD231SS 0(DI), X8, X0
	VFMADD231SS 0(R9), X8, X1
	VFMADD231SS 0(R10), X8, X2
	VFMADD231SS 0(R11), X8, X3
	ADDQ $4, SI
	ADDQ $4, DI
	ADDQ $4, R9
	ADDQ $4, R10
	ADDQ $4, R11
	DECQ CX
	JMP qytail

qydone:
	MOVQ out+32(FP), DX
	VMOVSS X0, 0(DX)
	VMOVSS X1, 4(DX)
	VMOVSS X2, 8(DX)
	VMOVSS X3, 12(DX)
	VZEROUPPER
	RET

// ---- F16C conversions, used by tests as the hardware reference for
// F32ToF16 and F16ToF32. n is a multiple of 8.

// func cvtPS2PH(dst *uint16, src *float32, n int)
TEXT ·cvtPS2PH(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX

cvt1:
	CMPQ CX, $8
	JLT cvt1done
	VMOVUPS 0(SI), Y0
	VCVTPS2PH $0, Y0, 0(DI) // imm 0: round to nearest even, not MXCSR
	ADDQ $32, SI
	ADDQ $16, DI
	SUBQ $8, CX
	JMP cvt1

cvt1done:
	VZEROUPPER
	RET

// func cvtPH2PS(dst *float32, src *uint16, n int)
TEXT ·cvtPH2PS(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX

cvt2:
	CMPQ CX, $8
	JLT cvt2done
	VCVTPH2PS 0(SI), Y0
	VMOVUPS Y0, 0(DI)
	ADDQ $16, SI
	ADDQ $32, DI
	SUBQ $8, CX
	JMP cvt2

cvt2done:
	VZEROUPPER
	RET
