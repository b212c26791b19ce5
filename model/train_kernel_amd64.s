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
