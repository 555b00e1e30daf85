//go:build amd64 && !purego

#include "textflag.h"

// func axpyPairAVX(d, a, b *float32, n int, k float32)
//
// d[i] += k·(a[i] + b[i]) for i < n, n a multiple of 8: an add, a
// multiply and an add, each rounded to float32 (no fused multiply-add),
// so bit for bit the portable loop of axpyPair.
TEXT ·axpyPairAVX(SB), NOSPLIT, $0-36
	MOVQ d+0(FP), DI
	MOVQ a+8(FP), SI
	MOVQ b+16(FP), DX
	MOVQ n+24(FP), CX
	VBROADCASTSS k+32(FP), Y0
	SHRQ $3, CX
	JZ   pairdone

pairloop:
	VMOVUPS (SI), Y1
	VADDPS  (DX), Y1, Y1
	VMULPS  Y0, Y1, Y1
	VADDPS  (DI), Y1, Y1
	VMOVUPS Y1, (DI)
	ADDQ    $32, SI
	ADDQ    $32, DX
	ADDQ    $32, DI
	DECQ    CX
	JNZ     pairloop

pairdone:
	VZEROUPPER
	RET

// func scaleAVX(d, c *float32, n int, k float32)
//
// d[i] = k·c[i] for i < n, n a multiple of 8.
TEXT ·scaleAVX(SB), NOSPLIT, $0-28
	MOVQ d+0(FP), DI
	MOVQ c+8(FP), SI
	MOVQ n+16(FP), CX
	VBROADCASTSS k+24(FP), Y0
	SHRQ $3, CX
	JZ   scaledone

scaleloop:
	VMULPS  (SI), Y0, Y1
	VMOVUPS Y1, (DI)
	ADDQ    $32, SI
	ADDQ    $32, DI
	DECQ    CX
	JNZ     scaleloop

scaledone:
	VZEROUPPER
	RET
