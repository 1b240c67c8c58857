#include "textflag.h"

// func gatherAdd5f32(dst, src *float32, lab *uint32, n int)
// dst[5·(lab[j]&0xffff)+c] += src[5·(lab[j]>>16)+c] for j < n, c < 5: four
// lanes with one SSE add, the fifth scalar (the same IEEE single additions
// as Go's).
TEXT ·gatherAdd5f32(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), BX
	MOVQ src+8(FP), SI
	MOVQ lab+16(FP), DI
	MOVQ n+24(FP), DX
	XORQ CX, CX
	TESTQ DX, DX
	JLE gdone
gloop:
	MOVL (DI)(CX*4), R8
	MOVL R8, R9
	ANDL $0xffff, R8
	SHRL $16, R9
	LEAQ (R8)(R8*4), R8
	LEAQ (R9)(R9*4), R9
	MOVUPS (BX)(R8*4), X0
	MOVUPS (SI)(R9*4), X1
	ADDPS X1, X0
	MOVUPS X0, (BX)(R8*4)
	MOVSS 16(BX)(R8*4), X2
	ADDSS 16(SI)(R9*4), X2
	MOVSS X2, 16(BX)(R8*4)
	INCQ CX
	CMPQ CX, DX
	JLT gloop
gdone:
	RET

// func scatterAdd5f32(dst, src *float32, lab *uint32, n int)
// dst[5·(lab[j]>>16)+c] += src[5·(lab[j]&0xffff)+c] for j < n, c < 5.
TEXT ·scatterAdd5f32(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), BX
	MOVQ src+8(FP), SI
	MOVQ lab+16(FP), DI
	MOVQ n+24(FP), DX
	XORQ CX, CX
	TESTQ DX, DX
	JLE sdone
sloop:
	MOVL (DI)(CX*4), R8
	MOVL R8, R9
	ANDL $0xffff, R8
	SHRL $16, R9
	LEAQ (R8)(R8*4), R8
	LEAQ (R9)(R9*4), R9
	MOVUPS (BX)(R9*4), X0
	MOVUPS (SI)(R8*4), X1
	ADDPS X1, X0
	MOVUPS X0, (BX)(R9*4)
	MOVSS 16(BX)(R9*4), X2
	ADDSS 16(SI)(R8*4), X2
	MOVSS X2, 16(BX)(R9*4)
	INCQ CX
	CMPQ CX, DX
	JLT sloop
sdone:
	RET
