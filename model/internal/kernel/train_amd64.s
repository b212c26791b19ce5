//go:build amd64 && !purego

#include "textflag.h"

// func trConvAVX2(a *float32, lda int, b *float32, k int, c *float32, ldc int)
// Four rows of a (stride lda floats) times a k x 16 trPanel of b, into four
// rows of 16 floats of c (stride ldc floats). k >= 1.
TEXT ·trConvAVX2(SB), NOSPLIT, $0-48
	MOVQ a+0(FP), SI
	MOVQ lda+8(FP), R8
	SHLQ $2, R8
	MOVQ b+16(FP), DI
	MOVQ k+24(FP), CX
	MOVQ c+32(FP), DX
	MOVQ ldc+40(FP), R9
	SHLQ $2, R9
	LEAQ (SI)(R8*1), R10
	LEAQ (R10)(R8*1), R11
	LEAQ (R11)(R8*1), R12
	VXORPS Y0, Y0, Y0
	VXORPS Y1, Y1, Y1
	VXORPS Y2, Y2, Y2
	VXORPS Y3, Y3, Y3
	VXORPS Y4, Y4, Y4
	VXORPS Y5, Y5, Y5
	VXORPS Y6, Y6, Y6
	VXORPS Y7, Y7, Y7
	XORQ AX, AX

loop:
	VMOVUPS      (DI), Y8
	VMOVUPS      32(DI), Y9
	VBROADCASTSS (SI)(AX*4), Y10
	VFMADD231PS  Y8, Y10, Y0
	VFMADD231PS  Y9, Y10, Y1
	VBROADCASTSS (R10)(AX*4), Y11
	VFMADD231PS  Y8, Y11, Y2
	VFMADD231PS  Y9, Y11, Y3
	VBROADCASTSS (R11)(AX*4), Y12
	VFMADD231PS  Y8, Y12, Y4
	VFMADD231PS  Y9, Y12, Y5
	VBROADCASTSS (R12)(AX*4), Y13
	VFMADD231PS  Y8, Y13, Y6
	VFMADD231PS  Y9, Y13, Y7
	ADDQ         $64, DI
	INCQ         AX
	CMPQ         AX, CX
	JLT          loop

	VMOVUPS Y0, (DX)
	VMOVUPS Y1, 32(DX)
	ADDQ    R9, DX
	VMOVUPS Y2, (DX)
	VMOVUPS Y3, 32(DX)
	ADDQ    R9, DX
	VMOVUPS Y4, (DX)
	VMOVUPS Y5, 32(DX)
	ADDQ    R9, DX
	VMOVUPS Y6, (DX)
	VMOVUPS Y7, 32(DX)
	VZEROUPPER
	RET

// func trAxpyAVX2(alpha float32, x, y *float32, n int)
// y[i] += alpha * x[i] for i < n; n is a multiple of 8.
TEXT ·trAxpyAVX2(SB), NOSPLIT, $0-32
	VBROADCASTSS alpha+0(FP), Y0
	MOVQ         x+8(FP), SI
	MOVQ         y+16(FP), DI
	MOVQ         n+24(FP), CX
	XORQ         AX, AX
	CMPQ         CX, $32
	JLT          tail

loop32:
	VMOVUPS     (DI)(AX*4), Y1
	VMOVUPS     32(DI)(AX*4), Y2
	VMOVUPS     64(DI)(AX*4), Y3
	VMOVUPS     96(DI)(AX*4), Y4
	VFMADD231PS (SI)(AX*4), Y0, Y1
	VFMADD231PS 32(SI)(AX*4), Y0, Y2
	VFMADD231PS 64(SI)(AX*4), Y0, Y3
	VFMADD231PS 96(SI)(AX*4), Y0, Y4
	VMOVUPS     Y1, (DI)(AX*4)
	VMOVUPS     Y2, 32(DI)(AX*4)
	VMOVUPS     Y3, 64(DI)(AX*4)
	VMOVUPS     Y4, 96(DI)(AX*4)
	ADDQ        $32, AX
	LEAQ        32(AX), BX
	CMPQ        BX, CX
	JLE         loop32

tail:
	CMPQ AX, CX
	JGE  done

loop8:
	VMOVUPS     (DI)(AX*4), Y1
	VFMADD231PS (SI)(AX*4), Y0, Y1
	VMOVUPS     Y1, (DI)(AX*4)
	ADDQ        $8, AX
	CMPQ        AX, CX
	JLT         loop8

done:
	VZEROUPPER
	RET

// func trConv2AVX512(a *float32, lda int, b *float32, k int, c *float32, ldc int)
// trConvAVX2 for two panels at once: four rows of a (stride lda floats)
// times the k x 16 panels at b and b + 16k floats, into four rows of 32
// floats of c (stride ldc floats). Each output is the same chain of fused
// multiply-adds over t as in trConvAVX2, so the two kernels agree bit for
// bit. k >= 1.
TEXT ·trConv2AVX512(SB), NOSPLIT, $0-48
	MOVQ a+0(FP), SI
	MOVQ lda+8(FP), R8
	SHLQ $2, R8
	MOVQ b+16(FP), DI
	MOVQ k+24(FP), CX
	MOVQ c+32(FP), DX
	MOVQ ldc+40(FP), R9
	SHLQ $2, R9
	MOVQ CX, R13
	SHLQ $6, R13 // bytes from panel b to the next one: 16k floats
	LEAQ (SI)(R8*1), R10
	LEAQ (R10)(R8*1), R11
	LEAQ (R11)(R8*1), R12
	VPXORD Z0, Z0, Z0
	VPXORD Z1, Z1, Z1
	VPXORD Z2, Z2, Z2
	VPXORD Z3, Z3, Z3
	VPXORD Z4, Z4, Z4
	VPXORD Z5, Z5, Z5
	VPXORD Z6, Z6, Z6
	VPXORD Z7, Z7, Z7
	XORQ AX, AX

loop2:
	VMOVUPS      (DI), Z8
	VMOVUPS      (DI)(R13*1), Z9
	VBROADCASTSS (SI)(AX*4), Z10
	VFMADD231PS  Z8, Z10, Z0
	VFMADD231PS  Z9, Z10, Z1
	VBROADCASTSS (R10)(AX*4), Z11
	VFMADD231PS  Z8, Z11, Z2
	VFMADD231PS  Z9, Z11, Z3
	VBROADCASTSS (R11)(AX*4), Z12
	VFMADD231PS  Z8, Z12, Z4
	VFMADD231PS  Z9, Z12, Z5
	VBROADCASTSS (R12)(AX*4), Z13
	VFMADD231PS  Z8, Z13, Z6
	VFMADD231PS  Z9, Z13, Z7
	ADDQ         $64, DI
	INCQ         AX
	CMPQ         AX, CX
	JLT          loop2

	VMOVUPS Z0, (DX)
	VMOVUPS Z1, 64(DX)
	ADDQ    R9, DX
	VMOVUPS Z2, (DX)
	VMOVUPS Z3, 64(DX)
	ADDQ    R9, DX
	VMOVUPS Z4, (DX)
	VMOVUPS Z5, 64(DX)
	ADDQ    R9, DX
	VMOVUPS Z6, (DX)
	VMOVUPS Z7, 64(DX)
	VZEROUPPER
	RET

// func adadeltaAVX2(lr float32, w, grad, sq, acc *float32, n int)
// adadeltaGo's arithmetic, operation for operation, eight elements at a
// time (no fused multiply-adds); n is a multiple of 8.
TEXT ·adadeltaAVX2(SB), NOSPLIT, $0-48
	VBROADCASTSS lr+0(FP), Y11
	MOVQ         w+8(FP), DI
	MOVQ         grad+16(FP), SI
	MOVQ         sq+24(FP), R8
	MOVQ         acc+32(FP), R9
	MOVQ         n+40(FP), CX
	MOVL         $0x3f733333, AX // float32(0.95), rho
	MOVL         AX, X14
	VBROADCASTSS X14, Y14
	MOVL         $0x3d4ccccd, AX // float32(0.05), 1 - rho
	MOVL         AX, X13
	VBROADCASTSS X13, Y13
	MOVL         $0x358637bd, AX // float32(1e-6), eps
	MOVL         AX, X12
	VBROADCASTSS X12, Y12
	XORQ         AX, AX

loop:
	CMPQ    AX, CX
	JGE     done
	VMOVUPS (SI)(AX*4), Y0        // g
	VMULPS  (R8)(AX*4), Y14, Y1   // rho*sq
	VMULPS  Y13, Y0, Y2           // (1-rho)*g
	VMULPS  Y0, Y2, Y2            // ...*g
	VADDPS  Y2, Y1, Y1            // sq'
	VMOVUPS Y1, (R8)(AX*4)
	VMOVUPS (R9)(AX*4), Y3        // acc
	VADDPS  Y12, Y3, Y4
	VSQRTPS Y4, Y4                // sqrt(acc+eps)
	VADDPS  Y12, Y1, Y5
	VSQRTPS Y5, Y5                // sqrt(sq'+eps)
	VDIVPS  Y5, Y4, Y4
	VMULPS  Y0, Y4, Y4            // delta
	VMULPS  Y14, Y3, Y3           // rho*acc
	VMULPS  Y13, Y4, Y6           // (1-rho)*delta
	VMULPS  Y4, Y6, Y6            // ...*delta
	VADDPS  Y6, Y3, Y3
	VMOVUPS Y3, (R9)(AX*4)
	VMULPS  Y11, Y4, Y7           // lr*delta
	VMOVUPS (DI)(AX*4), Y8
	VSUBPS  Y7, Y8, Y8
	VMOVUPS Y8, (DI)(AX*4)
	ADDQ    $8, AX
	JMP     loop

done:
	VZEROUPPER
	RET

// func trAxpyAVX512(alpha float32, x, y *float32, n int)
// trAxpyAVX2 sixteen elements at a time (the same fused multiply-add per
// element, so the same bits); n is a multiple of 16.
TEXT ·trAxpyAVX512(SB), NOSPLIT, $0-32
	VBROADCASTSS alpha+0(FP), Z0
	MOVQ         x+8(FP), SI
	MOVQ         y+16(FP), DI
	MOVQ         n+24(FP), CX
	XORQ         AX, AX
	CMPQ         CX, $64
	JLT          tail16

loop64:
	VMOVUPS     (DI)(AX*4), Z1
	VMOVUPS     64(DI)(AX*4), Z2
	VMOVUPS     128(DI)(AX*4), Z3
	VMOVUPS     192(DI)(AX*4), Z4
	VFMADD231PS (SI)(AX*4), Z0, Z1
	VFMADD231PS 64(SI)(AX*4), Z0, Z2
	VFMADD231PS 128(SI)(AX*4), Z0, Z3
	VFMADD231PS 192(SI)(AX*4), Z0, Z4
	VMOVUPS     Z1, (DI)(AX*4)
	VMOVUPS     Z2, 64(DI)(AX*4)
	VMOVUPS     Z3, 128(DI)(AX*4)
	VMOVUPS     Z4, 192(DI)(AX*4)
	ADDQ        $64, AX
	LEAQ        64(AX), BX
	CMPQ        BX, CX
	JLE         loop64

tail16:
	CMPQ AX, CX
	JGE  done16

loop16:
	VMOVUPS     (DI)(AX*4), Z1
	VFMADD231PS (SI)(AX*4), Z0, Z1
	VMOVUPS     Z1, (DI)(AX*4)
	ADDQ        $16, AX
	CMPQ        AX, CX
	JLT         loop16

done16:
	VZEROUPPER
	RET
