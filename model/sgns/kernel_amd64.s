#include "textflag.h"

// func dotAVX2(x, y []float32) float32
TEXT ·dotAVX2(SB), NOSPLIT, $0-52
	MOVQ   x_base+0(FP), SI
	MOVQ   x_len+8(FP), CX
	MOVQ   y_base+24(FP), DI
	VXORPS Y0, Y0, Y0
	VXORPS Y1, Y1, Y1
	VXORPS Y2, Y2, Y2
	VXORPS Y3, Y3, Y3

dot32:
	CMPQ        CX, $32
	JL          dot8
	VMOVUPS     (SI), Y4
	VMOVUPS     32(SI), Y5
	VMOVUPS     64(SI), Y6
	VMOVUPS     96(SI), Y7
	VFMADD231PS (DI), Y4, Y0
	VFMADD231PS 32(DI), Y5, Y1
	VFMADD231PS 64(DI), Y6, Y2
	VFMADD231PS 96(DI), Y7, Y3
	ADDQ        $128, SI
	ADDQ        $128, DI
	SUBQ        $32, CX
	JMP         dot32

dot8:
	CMPQ        CX, $8
	JL          dotsum
	VMOVUPS     (SI), Y4
	VFMADD231PS (DI), Y4, Y0
	ADDQ        $32, SI
	ADDQ        $32, DI
	SUBQ        $8, CX
	JMP         dot8

dotsum:
	VADDPS       Y1, Y0, Y0
	VADDPS       Y3, Y2, Y2
	VADDPS       Y2, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPS       X1, X0, X0
	VHADDPS      X0, X0, X0
	VHADDPS      X0, X0, X0

dot1:
	TESTQ       CX, CX
	JE          dotdone
	VMOVSS      (SI), X4
	VFMADD231SS (DI), X4, X0
	ADDQ        $4, SI
	ADDQ        $4, DI
	DECQ        CX
	JMP         dot1

dotdone:
	VZEROUPPER
	MOVSS X0, ret+48(FP)
	RET

// func axpyAVX2(a float32, x, y []float32)
TEXT ·axpyAVX2(SB), NOSPLIT, $0-56
	VBROADCASTSS a+0(FP), Y0
	MOVQ         x_base+8(FP), SI
	MOVQ         x_len+16(FP), CX
	MOVQ         y_base+32(FP), DI

axpy32:
	CMPQ        CX, $32
	JL          axpy8
	VMOVUPS     (DI), Y1
	VMOVUPS     32(DI), Y2
	VMOVUPS     64(DI), Y3
	VMOVUPS     96(DI), Y4
	VFMADD231PS (SI), Y0, Y1
	VFMADD231PS 32(SI), Y0, Y2
	VFMADD231PS 64(SI), Y0, Y3
	VFMADD231PS 96(SI), Y0, Y4
	VMOVUPS     Y1, (DI)
	VMOVUPS     Y2, 32(DI)
	VMOVUPS     Y3, 64(DI)
	VMOVUPS     Y4, 96(DI)
	ADDQ        $128, SI
	ADDQ        $128, DI
	SUBQ        $32, CX
	JMP         axpy32

axpy8:
	CMPQ        CX, $8
	JL          axpy1
	VMOVUPS     (DI), Y1
	VFMADD231PS (SI), Y0, Y1
	VMOVUPS     Y1, (DI)
	ADDQ        $32, SI
	ADDQ        $32, DI
	SUBQ        $8, CX
	JMP         axpy8

axpy1:
	TESTQ       CX, CX
	JE          axpydone
	VMOVSS      (DI), X1
	VFMADD231SS (SI), X0, X1
	VMOVSS      X1, (DI)
	ADDQ        $4, SI
	ADDQ        $4, DI
	DECQ        CX
	JMP         axpy1

axpydone:
	VZEROUPPER
	RET
