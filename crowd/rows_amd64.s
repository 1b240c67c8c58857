#include "textflag.h"

// func gatherAdd5f32(dst, src *float32, items *int32, codes *uint16, n int)
// dst[5·items[j]+c] += src[5·codes[j]+c] for j < n, c < 5: four lanes with
// one SSE add, the fifth scalar (the same IEEE single additions as Go's).
TEXT ·gatherAdd5f32(SB), NOSPLIT, $0-40
	MOVQ dst+0(FP), BX
	MOVQ src+8(FP), SI
	MOVQ items+16(FP), DI
	MOVQ codes+24(FP), AX
	MOVQ n+32(FP), DX
	XORQ CX, CX
	TESTQ DX, DX
	JLE gdone
gloop:
	MOVLQSX (DI)(CX*4), R8
	MOVWQZX (AX)(CX*2), R9
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

// func scatterAdd5f32(dst, src *float32, items *int32, codes *uint16, n int)
// dst[5·codes[j]+c] += src[5·items[j]+c] for j < n, c < 5.
TEXT ·scatterAdd5f32(SB), NOSPLIT, $0-40
	MOVQ dst+0(FP), BX
	MOVQ src+8(FP), SI
	MOVQ items+16(FP), DI
	MOVQ codes+24(FP), AX
	MOVQ n+32(FP), DX
	XORQ CX, CX
	TESTQ DX, DX
	JLE sdone
sloop:
	MOVLQSX (DI)(CX*4), R8
	MOVWQZX (AX)(CX*2), R9
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
