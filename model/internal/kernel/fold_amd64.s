//go:build amd64 && !purego

#include "textflag.h"

// Folded convolution kernels. Each processes one chunk of columns (1, 4 or
// 8 vectors of filters) of one width's table for a whole text:
//
//	func foldT_ISAxV(tab *T, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
//
// tab, bias, mx and win point at the chunk's first column; rowBytes is the
// byte size of one row's w taps, tapBytes of one tap. For each position p
// the taps k < min(w, n-p) are added to the bias in order (as the generic
// code does, so results are bit-identical), then the running maximum is
// kept against a start of 0, which is ReLU and max-over-time in one step.
// With win non-nil the first position reaching each maximum is kept too
// (strict greater-than, start -1); with win nil a plain VMAXPS does, which
// returns its second source on equality exactly like the strict compare.
//
// With pf > 0, each position first prefetches the whole row (all w taps)
// of the token pf positions beyond its window, rows[p+w-1+pf], into L1:
// the rows of a text are random, so no hardware prefetcher can guess them,
// and without this the window's loads wait on memory within the reorder
// window only. Callers pass pf only for the first chunk of a table, where
// tab is the row start, so the lines fetched are exactly the row's.
//
// The x8 kernels (AVX-512 only) cover 5..8 vectors in one pass: vectors
// 0-3 are whole, vectors 4-7 use the lane masks in masks (16 bits each,
// low first) for every load and store, so no byte past the chunk is read
// (EVEX masking suppresses faults on masked lanes) or written.
//
// Registers: DI table chunk base, R8 rows, BX n, R9 w, R10 rowBytes,
// R11 tapBytes, R13 bias, CX position, DX taps left, SI &rows[p+k],
// R12 tap base, AX tap address.
// AVX-512: Z0-Z7 sums, Z8-Z15 maxima, Z16-Z23 winners, Z24 position,
// Z25 ones, Z26-Z29 widened halves, K1 compare, K4-K7 lane masks.
// AVX2: Y0-Y3 sums, Y4-Y7 maxima, Y8-Y11 winners, Y12 position, Y13 ones,
// Y14 widened halves, Y15 compare mask.

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

// AX = address of this tap's chunk in row rows[p+k]. A plain base
// register, not base+index: indexed memory operands of three-operand
// vector instructions split into two micro-ops on many Intel cores.
#define TAP_ROW \
	MOVL (SI), AX; \
	IMULQ R10, AX; \
	ADDQ R12, AX

#define TAP_NEXT \
	ADDQ $4, SI; \
	ADDQ R11, R12; \
	DECQ DX

#define Z_START \
	MOVL $1, AX; \
	VPBROADCASTD AX, Z25; \
	VPXORD Z24, Z24, Z24; \
	XORQ CX, CX

#define Y_START \
	MOVL $1, AX; \
	MOVQ AX, X13; \
	VPBROADCASTD X13, Y13; \
	VPXOR Y12, Y12, Y12; \
	XORQ CX, CX

#define Z_MASKS \
	MOVQ masks+72(FP), AX; \
	KMOVW AX, K4; \
	SHRQ $16, AX; \
	KMOVW AX, K5; \
	SHRQ $16, AX; \
	KMOVW AX, K6; \
	SHRQ $16, AX; \
	KMOVW AX, K7

// func foldF32AVX512x8(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF32AVX512x8(SB), NOSPLIT, $0-88
	FOLD_ARGS
	Z_MASKS
	VPXORD Z8, Z8, Z8
	VPXORD Z9, Z9, Z9
	VPXORD Z10, Z10, Z10
	VPXORD Z11, Z11, Z11
	VPXORD Z12, Z12, Z12
	VPXORD Z13, Z13, Z13
	VPXORD Z14, Z14, Z14
	VPXORD Z15, Z15, Z15
	VPTERNLOGD $0xff, Z16, Z16, Z16
	VPTERNLOGD $0xff, Z17, Z17, Z17
	VPTERNLOGD $0xff, Z18, Z18, Z18
	VPTERNLOGD $0xff, Z19, Z19, Z19
	VPTERNLOGD $0xff, Z20, Z20, Z20
	VPTERNLOGD $0xff, Z21, Z21, Z21
	VPTERNLOGD $0xff, Z22, Z22, Z22
	VPTERNLOGD $0xff, Z23, Z23, Z23
	Z_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f32z8pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f32z8prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f32z8proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f32z8proline
	INCQ SI
	CMPQ SI, DX
	JLT f32z8prorow

f32z8pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f32z8pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f32z8pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f32z8pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f32z8pf

f32z8pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Z0
	VMOVUPS 64(R13), Z1
	VMOVUPS 128(R13), Z2
	VMOVUPS 192(R13), Z3
	VMOVUPS.Z 256(R13), K4, Z4
	VMOVUPS.Z 320(R13), K5, Z5
	VMOVUPS.Z 384(R13), K6, Z6
	VMOVUPS.Z 448(R13), K7, Z7

f32z8tap:
	TAP_ROW
	VADDPS 0(AX), Z0, Z0
	VADDPS 64(AX), Z1, Z1
	VADDPS 128(AX), Z2, Z2
	VADDPS 192(AX), Z3, Z3
	VADDPS 256(AX), Z4, K4, Z4
	VADDPS 320(AX), Z5, K5, Z5
	VADDPS 384(AX), Z6, K6, Z6
	VADDPS 448(AX), Z7, K7, Z7
	TAP_NEXT
	JNZ f32z8tap

	CMPQ win+64(FP), $0
	JEQ f32z8max
	VCMPPS $0x1e, Z8, Z0, K1
	VMOVAPS Z0, K1, Z8
	VMOVDQA32 Z24, K1, Z16
	VCMPPS $0x1e, Z9, Z1, K1
	VMOVAPS Z1, K1, Z9
	VMOVDQA32 Z24, K1, Z17
	VCMPPS $0x1e, Z10, Z2, K1
	VMOVAPS Z2, K1, Z10
	VMOVDQA32 Z24, K1, Z18
	VCMPPS $0x1e, Z11, Z3, K1
	VMOVAPS Z3, K1, Z11
	VMOVDQA32 Z24, K1, Z19
	VCMPPS $0x1e, Z12, Z4, K1
	VMOVAPS Z4, K1, Z12
	VMOVDQA32 Z24, K1, Z20
	VCMPPS $0x1e, Z13, Z5, K1
	VMOVAPS Z5, K1, Z13
	VMOVDQA32 Z24, K1, Z21
	VCMPPS $0x1e, Z14, Z6, K1
	VMOVAPS Z6, K1, Z14
	VMOVDQA32 Z24, K1, Z22
	VCMPPS $0x1e, Z15, Z7, K1
	VMOVAPS Z7, K1, Z15
	VMOVDQA32 Z24, K1, Z23
	VPADDD Z25, Z24, Z24
	JMP f32z8next

f32z8max:
	VMAXPS Z8, Z0, Z8
	VMAXPS Z9, Z1, Z9
	VMAXPS Z10, Z2, Z10
	VMAXPS Z11, Z3, Z11
	VMAXPS Z12, Z4, Z12
	VMAXPS Z13, Z5, Z13
	VMAXPS Z14, Z6, Z14
	VMAXPS Z15, Z7, Z15

f32z8next:
	INCQ CX
	CMPQ CX, BX
	JLT f32z8pos

	MOVQ mx+56(FP), AX
	VMOVUPS Z8, 0(AX)
	VMOVUPS Z9, 64(AX)
	VMOVUPS Z10, 128(AX)
	VMOVUPS Z11, 192(AX)
	VMOVUPS Z12, K4, 256(AX)
	VMOVUPS Z13, K5, 320(AX)
	VMOVUPS Z14, K6, 384(AX)
	VMOVUPS Z15, K7, 448(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f32z8done
	VMOVDQU32 Z16, 0(AX)
	VMOVDQU32 Z17, 64(AX)
	VMOVDQU32 Z18, 128(AX)
	VMOVDQU32 Z19, 192(AX)
	VMOVDQU32 Z20, K4, 256(AX)
	VMOVDQU32 Z21, K5, 320(AX)
	VMOVDQU32 Z22, K6, 384(AX)
	VMOVDQU32 Z23, K7, 448(AX)

f32z8done:
	VZEROUPPER
	RET

// func foldF32AVX512x4(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF32AVX512x4(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VPXORD Z8, Z8, Z8
	VPXORD Z9, Z9, Z9
	VPXORD Z10, Z10, Z10
	VPXORD Z11, Z11, Z11
	VPTERNLOGD $0xff, Z16, Z16, Z16
	VPTERNLOGD $0xff, Z17, Z17, Z17
	VPTERNLOGD $0xff, Z18, Z18, Z18
	VPTERNLOGD $0xff, Z19, Z19, Z19
	Z_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f32z4pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f32z4prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f32z4proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f32z4proline
	INCQ SI
	CMPQ SI, DX
	JLT f32z4prorow

f32z4pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f32z4pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f32z4pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f32z4pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f32z4pf

f32z4pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Z0
	VMOVUPS 64(R13), Z1
	VMOVUPS 128(R13), Z2
	VMOVUPS 192(R13), Z3

f32z4tap:
	TAP_ROW
	VADDPS 0(AX), Z0, Z0
	VADDPS 64(AX), Z1, Z1
	VADDPS 128(AX), Z2, Z2
	VADDPS 192(AX), Z3, Z3
	TAP_NEXT
	JNZ f32z4tap

	CMPQ win+64(FP), $0
	JEQ f32z4max
	VCMPPS $0x1e, Z8, Z0, K1
	VMOVAPS Z0, K1, Z8
	VMOVDQA32 Z24, K1, Z16
	VCMPPS $0x1e, Z9, Z1, K1
	VMOVAPS Z1, K1, Z9
	VMOVDQA32 Z24, K1, Z17
	VCMPPS $0x1e, Z10, Z2, K1
	VMOVAPS Z2, K1, Z10
	VMOVDQA32 Z24, K1, Z18
	VCMPPS $0x1e, Z11, Z3, K1
	VMOVAPS Z3, K1, Z11
	VMOVDQA32 Z24, K1, Z19
	VPADDD Z25, Z24, Z24
	JMP f32z4next

f32z4max:
	VMAXPS Z8, Z0, Z8
	VMAXPS Z9, Z1, Z9
	VMAXPS Z10, Z2, Z10
	VMAXPS Z11, Z3, Z11

f32z4next:
	INCQ CX
	CMPQ CX, BX
	JLT f32z4pos

	MOVQ mx+56(FP), AX
	VMOVUPS Z8, 0(AX)
	VMOVUPS Z9, 64(AX)
	VMOVUPS Z10, 128(AX)
	VMOVUPS Z11, 192(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f32z4done
	VMOVDQU32 Z16, 0(AX)
	VMOVDQU32 Z17, 64(AX)
	VMOVDQU32 Z18, 128(AX)
	VMOVDQU32 Z19, 192(AX)

f32z4done:
	VZEROUPPER
	RET

// func foldF32AVX512x1(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF32AVX512x1(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VPXORD Z8, Z8, Z8
	VPTERNLOGD $0xff, Z16, Z16, Z16
	Z_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f32z1pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f32z1prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f32z1proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f32z1proline
	INCQ SI
	CMPQ SI, DX
	JLT f32z1prorow

f32z1pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f32z1pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f32z1pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f32z1pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f32z1pf

f32z1pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Z0

f32z1tap:
	TAP_ROW
	VADDPS 0(AX), Z0, Z0
	TAP_NEXT
	JNZ f32z1tap

	CMPQ win+64(FP), $0
	JEQ f32z1max
	VCMPPS $0x1e, Z8, Z0, K1
	VMOVAPS Z0, K1, Z8
	VMOVDQA32 Z24, K1, Z16
	VPADDD Z25, Z24, Z24
	JMP f32z1next

f32z1max:
	VMAXPS Z8, Z0, Z8

f32z1next:
	INCQ CX
	CMPQ CX, BX
	JLT f32z1pos

	MOVQ mx+56(FP), AX
	VMOVUPS Z8, 0(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f32z1done
	VMOVDQU32 Z16, 0(AX)

f32z1done:
	VZEROUPPER
	RET

// func foldF16AVX512x8(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF16AVX512x8(SB), NOSPLIT, $0-88
	FOLD_ARGS
	Z_MASKS
	VPXORD Z8, Z8, Z8
	VPXORD Z9, Z9, Z9
	VPXORD Z10, Z10, Z10
	VPXORD Z11, Z11, Z11
	VPXORD Z12, Z12, Z12
	VPXORD Z13, Z13, Z13
	VPXORD Z14, Z14, Z14
	VPXORD Z15, Z15, Z15
	VPTERNLOGD $0xff, Z16, Z16, Z16
	VPTERNLOGD $0xff, Z17, Z17, Z17
	VPTERNLOGD $0xff, Z18, Z18, Z18
	VPTERNLOGD $0xff, Z19, Z19, Z19
	VPTERNLOGD $0xff, Z20, Z20, Z20
	VPTERNLOGD $0xff, Z21, Z21, Z21
	VPTERNLOGD $0xff, Z22, Z22, Z22
	VPTERNLOGD $0xff, Z23, Z23, Z23
	Z_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f16z8pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f16z8prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f16z8proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f16z8proline
	INCQ SI
	CMPQ SI, DX
	JLT f16z8prorow

f16z8pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f16z8pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f16z8pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f16z8pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f16z8pf

f16z8pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Z0
	VMOVUPS 64(R13), Z1
	VMOVUPS 128(R13), Z2
	VMOVUPS 192(R13), Z3
	VMOVUPS.Z 256(R13), K4, Z4
	VMOVUPS.Z 320(R13), K5, Z5
	VMOVUPS.Z 384(R13), K6, Z6
	VMOVUPS.Z 448(R13), K7, Z7

f16z8tap:
	TAP_ROW
	VCVTPH2PS 0(AX), Z26
	VADDPS Z26, Z0, Z0
	VCVTPH2PS 32(AX), Z27
	VADDPS Z27, Z1, Z1
	VCVTPH2PS 64(AX), Z28
	VADDPS Z28, Z2, Z2
	VCVTPH2PS 96(AX), Z29
	VADDPS Z29, Z3, Z3
	VCVTPH2PS.Z 128(AX), K4, Z26
	VADDPS Z26, Z4, Z4
	VCVTPH2PS.Z 160(AX), K5, Z27
	VADDPS Z27, Z5, Z5
	VCVTPH2PS.Z 192(AX), K6, Z28
	VADDPS Z28, Z6, Z6
	VCVTPH2PS.Z 224(AX), K7, Z29
	VADDPS Z29, Z7, Z7
	TAP_NEXT
	JNZ f16z8tap

	CMPQ win+64(FP), $0
	JEQ f16z8max
	VCMPPS $0x1e, Z8, Z0, K1
	VMOVAPS Z0, K1, Z8
	VMOVDQA32 Z24, K1, Z16
	VCMPPS $0x1e, Z9, Z1, K1
	VMOVAPS Z1, K1, Z9
	VMOVDQA32 Z24, K1, Z17
	VCMPPS $0x1e, Z10, Z2, K1
	VMOVAPS Z2, K1, Z10
	VMOVDQA32 Z24, K1, Z18
	VCMPPS $0x1e, Z11, Z3, K1
	VMOVAPS Z3, K1, Z11
	VMOVDQA32 Z24, K1, Z19
	VCMPPS $0x1e, Z12, Z4, K1
	VMOVAPS Z4, K1, Z12
	VMOVDQA32 Z24, K1, Z20
	VCMPPS $0x1e, Z13, Z5, K1
	VMOVAPS Z5, K1, Z13
	VMOVDQA32 Z24, K1, Z21
	VCMPPS $0x1e, Z14, Z6, K1
	VMOVAPS Z6, K1, Z14
	VMOVDQA32 Z24, K1, Z22
	VCMPPS $0x1e, Z15, Z7, K1
	VMOVAPS Z7, K1, Z15
	VMOVDQA32 Z24, K1, Z23
	VPADDD Z25, Z24, Z24
	JMP f16z8next

f16z8max:
	VMAXPS Z8, Z0, Z8
	VMAXPS Z9, Z1, Z9
	VMAXPS Z10, Z2, Z10
	VMAXPS Z11, Z3, Z11
	VMAXPS Z12, Z4, Z12
	VMAXPS Z13, Z5, Z13
	VMAXPS Z14, Z6, Z14
	VMAXPS Z15, Z7, Z15

f16z8next:
	INCQ CX
	CMPQ CX, BX
	JLT f16z8pos

	MOVQ mx+56(FP), AX
	VMOVUPS Z8, 0(AX)
	VMOVUPS Z9, 64(AX)
	VMOVUPS Z10, 128(AX)
	VMOVUPS Z11, 192(AX)
	VMOVUPS Z12, K4, 256(AX)
	VMOVUPS Z13, K5, 320(AX)
	VMOVUPS Z14, K6, 384(AX)
	VMOVUPS Z15, K7, 448(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f16z8done
	VMOVDQU32 Z16, 0(AX)
	VMOVDQU32 Z17, 64(AX)
	VMOVDQU32 Z18, 128(AX)
	VMOVDQU32 Z19, 192(AX)
	VMOVDQU32 Z20, K4, 256(AX)
	VMOVDQU32 Z21, K5, 320(AX)
	VMOVDQU32 Z22, K6, 384(AX)
	VMOVDQU32 Z23, K7, 448(AX)

f16z8done:
	VZEROUPPER
	RET

// func foldF16AVX512x4(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF16AVX512x4(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VPXORD Z8, Z8, Z8
	VPXORD Z9, Z9, Z9
	VPXORD Z10, Z10, Z10
	VPXORD Z11, Z11, Z11
	VPTERNLOGD $0xff, Z16, Z16, Z16
	VPTERNLOGD $0xff, Z17, Z17, Z17
	VPTERNLOGD $0xff, Z18, Z18, Z18
	VPTERNLOGD $0xff, Z19, Z19, Z19
	Z_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f16z4pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f16z4prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f16z4proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f16z4proline
	INCQ SI
	CMPQ SI, DX
	JLT f16z4prorow

f16z4pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f16z4pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f16z4pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f16z4pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f16z4pf

f16z4pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Z0
	VMOVUPS 64(R13), Z1
	VMOVUPS 128(R13), Z2
	VMOVUPS 192(R13), Z3

f16z4tap:
	TAP_ROW
	VCVTPH2PS 0(AX), Z26
	VADDPS Z26, Z0, Z0
	VCVTPH2PS 32(AX), Z27
	VADDPS Z27, Z1, Z1
	VCVTPH2PS 64(AX), Z28
	VADDPS Z28, Z2, Z2
	VCVTPH2PS 96(AX), Z29
	VADDPS Z29, Z3, Z3
	TAP_NEXT
	JNZ f16z4tap

	CMPQ win+64(FP), $0
	JEQ f16z4max
	VCMPPS $0x1e, Z8, Z0, K1
	VMOVAPS Z0, K1, Z8
	VMOVDQA32 Z24, K1, Z16
	VCMPPS $0x1e, Z9, Z1, K1
	VMOVAPS Z1, K1, Z9
	VMOVDQA32 Z24, K1, Z17
	VCMPPS $0x1e, Z10, Z2, K1
	VMOVAPS Z2, K1, Z10
	VMOVDQA32 Z24, K1, Z18
	VCMPPS $0x1e, Z11, Z3, K1
	VMOVAPS Z3, K1, Z11
	VMOVDQA32 Z24, K1, Z19
	VPADDD Z25, Z24, Z24
	JMP f16z4next

f16z4max:
	VMAXPS Z8, Z0, Z8
	VMAXPS Z9, Z1, Z9
	VMAXPS Z10, Z2, Z10
	VMAXPS Z11, Z3, Z11

f16z4next:
	INCQ CX
	CMPQ CX, BX
	JLT f16z4pos

	MOVQ mx+56(FP), AX
	VMOVUPS Z8, 0(AX)
	VMOVUPS Z9, 64(AX)
	VMOVUPS Z10, 128(AX)
	VMOVUPS Z11, 192(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f16z4done
	VMOVDQU32 Z16, 0(AX)
	VMOVDQU32 Z17, 64(AX)
	VMOVDQU32 Z18, 128(AX)
	VMOVDQU32 Z19, 192(AX)

f16z4done:
	VZEROUPPER
	RET

// func foldF16AVX512x1(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF16AVX512x1(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VPXORD Z8, Z8, Z8
	VPTERNLOGD $0xff, Z16, Z16, Z16
	Z_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f16z1pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f16z1prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f16z1proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f16z1proline
	INCQ SI
	CMPQ SI, DX
	JLT f16z1prorow

f16z1pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f16z1pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f16z1pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f16z1pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f16z1pf

f16z1pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Z0

f16z1tap:
	TAP_ROW
	VCVTPH2PS 0(AX), Z26
	VADDPS Z26, Z0, Z0
	TAP_NEXT
	JNZ f16z1tap

	CMPQ win+64(FP), $0
	JEQ f16z1max
	VCMPPS $0x1e, Z8, Z0, K1
	VMOVAPS Z0, K1, Z8
	VMOVDQA32 Z24, K1, Z16
	VPADDD Z25, Z24, Z24
	JMP f16z1next

f16z1max:
	VMAXPS Z8, Z0, Z8

f16z1next:
	INCQ CX
	CMPQ CX, BX
	JLT f16z1pos

	MOVQ mx+56(FP), AX
	VMOVUPS Z8, 0(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f16z1done
	VMOVDQU32 Z16, 0(AX)

f16z1done:
	VZEROUPPER
	RET

// func foldF32AVX2x4(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF32AVX2x4(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VXORPS Y4, Y4, Y4
	VXORPS Y5, Y5, Y5
	VXORPS Y6, Y6, Y6
	VXORPS Y7, Y7, Y7
	VPCMPEQD Y8, Y8, Y8
	VPCMPEQD Y9, Y9, Y9
	VPCMPEQD Y10, Y10, Y10
	VPCMPEQD Y11, Y11, Y11
	Y_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f32y4pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f32y4prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f32y4proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f32y4proline
	INCQ SI
	CMPQ SI, DX
	JLT f32y4prorow

f32y4pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f32y4pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f32y4pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f32y4pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f32y4pf

f32y4pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Y0
	VMOVUPS 32(R13), Y1
	VMOVUPS 64(R13), Y2
	VMOVUPS 96(R13), Y3

f32y4tap:
	TAP_ROW
	VADDPS 0(AX), Y0, Y0
	VADDPS 32(AX), Y1, Y1
	VADDPS 64(AX), Y2, Y2
	VADDPS 96(AX), Y3, Y3
	TAP_NEXT
	JNZ f32y4tap

	CMPQ win+64(FP), $0
	JEQ f32y4max
	VCMPPS $0x1e, Y4, Y0, Y15
	VBLENDVPS Y15, Y0, Y4, Y4
	VBLENDVPS Y15, Y12, Y8, Y8
	VCMPPS $0x1e, Y5, Y1, Y15
	VBLENDVPS Y15, Y1, Y5, Y5
	VBLENDVPS Y15, Y12, Y9, Y9
	VCMPPS $0x1e, Y6, Y2, Y15
	VBLENDVPS Y15, Y2, Y6, Y6
	VBLENDVPS Y15, Y12, Y10, Y10
	VCMPPS $0x1e, Y7, Y3, Y15
	VBLENDVPS Y15, Y3, Y7, Y7
	VBLENDVPS Y15, Y12, Y11, Y11
	VPADDD Y13, Y12, Y12
	JMP f32y4next

f32y4max:
	VMAXPS Y4, Y0, Y4
	VMAXPS Y5, Y1, Y5
	VMAXPS Y6, Y2, Y6
	VMAXPS Y7, Y3, Y7

f32y4next:
	INCQ CX
	CMPQ CX, BX
	JLT f32y4pos

	MOVQ mx+56(FP), AX
	VMOVUPS Y4, 0(AX)
	VMOVUPS Y5, 32(AX)
	VMOVUPS Y6, 64(AX)
	VMOVUPS Y7, 96(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f32y4done
	VMOVDQU Y8, 0(AX)
	VMOVDQU Y9, 32(AX)
	VMOVDQU Y10, 64(AX)
	VMOVDQU Y11, 96(AX)

f32y4done:
	VZEROUPPER
	RET

// func foldF32AVX2x1(tab *float32, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF32AVX2x1(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VXORPS Y4, Y4, Y4
	VPCMPEQD Y8, Y8, Y8
	Y_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f32y1pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f32y1prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f32y1proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f32y1proline
	INCQ SI
	CMPQ SI, DX
	JLT f32y1prorow

f32y1pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f32y1pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f32y1pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f32y1pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f32y1pf

f32y1pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Y0

f32y1tap:
	TAP_ROW
	VADDPS 0(AX), Y0, Y0
	TAP_NEXT
	JNZ f32y1tap

	CMPQ win+64(FP), $0
	JEQ f32y1max
	VCMPPS $0x1e, Y4, Y0, Y15
	VBLENDVPS Y15, Y0, Y4, Y4
	VBLENDVPS Y15, Y12, Y8, Y8
	VPADDD Y13, Y12, Y12
	JMP f32y1next

f32y1max:
	VMAXPS Y4, Y0, Y4

f32y1next:
	INCQ CX
	CMPQ CX, BX
	JLT f32y1pos

	MOVQ mx+56(FP), AX
	VMOVUPS Y4, 0(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f32y1done
	VMOVDQU Y8, 0(AX)

f32y1done:
	VZEROUPPER
	RET

// func foldF16AVX2x4(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF16AVX2x4(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VXORPS Y4, Y4, Y4
	VXORPS Y5, Y5, Y5
	VXORPS Y6, Y6, Y6
	VXORPS Y7, Y7, Y7
	VPCMPEQD Y8, Y8, Y8
	VPCMPEQD Y9, Y9, Y9
	VPCMPEQD Y10, Y10, Y10
	VPCMPEQD Y11, Y11, Y11
	Y_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f16y4pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f16y4prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f16y4proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f16y4proline
	INCQ SI
	CMPQ SI, DX
	JLT f16y4prorow

f16y4pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f16y4pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f16y4pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f16y4pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f16y4pf

f16y4pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Y0
	VMOVUPS 32(R13), Y1
	VMOVUPS 64(R13), Y2
	VMOVUPS 96(R13), Y3

f16y4tap:
	TAP_ROW
	VCVTPH2PS 0(AX), Y14
	VADDPS Y14, Y0, Y0
	VCVTPH2PS 16(AX), Y14
	VADDPS Y14, Y1, Y1
	VCVTPH2PS 32(AX), Y14
	VADDPS Y14, Y2, Y2
	VCVTPH2PS 48(AX), Y14
	VADDPS Y14, Y3, Y3
	TAP_NEXT
	JNZ f16y4tap

	CMPQ win+64(FP), $0
	JEQ f16y4max
	VCMPPS $0x1e, Y4, Y0, Y15
	VBLENDVPS Y15, Y0, Y4, Y4
	VBLENDVPS Y15, Y12, Y8, Y8
	VCMPPS $0x1e, Y5, Y1, Y15
	VBLENDVPS Y15, Y1, Y5, Y5
	VBLENDVPS Y15, Y12, Y9, Y9
	VCMPPS $0x1e, Y6, Y2, Y15
	VBLENDVPS Y15, Y2, Y6, Y6
	VBLENDVPS Y15, Y12, Y10, Y10
	VCMPPS $0x1e, Y7, Y3, Y15
	VBLENDVPS Y15, Y3, Y7, Y7
	VBLENDVPS Y15, Y12, Y11, Y11
	VPADDD Y13, Y12, Y12
	JMP f16y4next

f16y4max:
	VMAXPS Y4, Y0, Y4
	VMAXPS Y5, Y1, Y5
	VMAXPS Y6, Y2, Y6
	VMAXPS Y7, Y3, Y7

f16y4next:
	INCQ CX
	CMPQ CX, BX
	JLT f16y4pos

	MOVQ mx+56(FP), AX
	VMOVUPS Y4, 0(AX)
	VMOVUPS Y5, 32(AX)
	VMOVUPS Y6, 64(AX)
	VMOVUPS Y7, 96(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f16y4done
	VMOVDQU Y8, 0(AX)
	VMOVDQU Y9, 32(AX)
	VMOVDQU Y10, 64(AX)
	VMOVDQU Y11, 96(AX)

f16y4done:
	VZEROUPPER
	RET

// func foldF16AVX2x1(tab *uint16, rows *int32, n, w, rowBytes, tapBytes int, bias, mx *float32, win *int32, masks uint64, pf int)
TEXT ·foldF16AVX2x1(SB), NOSPLIT, $0-88
	FOLD_ARGS
	VXORPS Y4, Y4, Y4
	VPCMPEQD Y8, Y8, Y8
	Y_START

	// Prefetch the rows of the first pf+w-1 tokens, which the loop's
	// look-ahead does not reach.
	MOVQ pf+80(FP), DX
	TESTQ DX, DX
	JEQ f16y1pos
	ADDQ R9, DX
	DECQ DX
	CMPQ DX, BX
	CMOVQGT BX, DX
	XORQ SI, SI

f16y1prorow:
	MOVL (R8)(SI*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, R12

f16y1proline:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, R12
	JG f16y1proline
	INCQ SI
	CMPQ SI, DX
	JLT f16y1prorow

f16y1pos:
	MOVQ pf+80(FP), AX
	TESTQ AX, AX
	JEQ f16y1pfdone
	ADDQ CX, AX
	ADDQ R9, AX
	DECQ AX
	CMPQ AX, BX
	JGE f16y1pfdone
	MOVL (R8)(AX*4), AX
	IMULQ R10, AX
	ADDQ DI, AX
	MOVQ R10, DX

f16y1pf:
	PREFETCHT0 (AX)
	PREFETCHT0 64(AX)
	ADDQ $128, AX
	SUBQ $128, DX
	JG f16y1pf

f16y1pfdone:
	POS_SETUP
	VMOVUPS 0(R13), Y0

f16y1tap:
	TAP_ROW
	VCVTPH2PS 0(AX), Y14
	VADDPS Y14, Y0, Y0
	TAP_NEXT
	JNZ f16y1tap

	CMPQ win+64(FP), $0
	JEQ f16y1max
	VCMPPS $0x1e, Y4, Y0, Y15
	VBLENDVPS Y15, Y0, Y4, Y4
	VBLENDVPS Y15, Y12, Y8, Y8
	VPADDD Y13, Y12, Y12
	JMP f16y1next

f16y1max:
	VMAXPS Y4, Y0, Y4

f16y1next:
	INCQ CX
	CMPQ CX, BX
	JLT f16y1pos

	MOVQ mx+56(FP), AX
	VMOVUPS Y4, 0(AX)
	MOVQ win+64(FP), AX
	TESTQ AX, AX
	JEQ f16y1done
	VMOVDQU Y8, 0(AX)

f16y1done:
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
