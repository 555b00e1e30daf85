//go:build amd64 && !purego

#include "textflag.h"

// Byte shuffle: the R, G, B bytes of four RGBA pixels to the first 12
// bytes (alpha dropped), the rest zero.
DATA shufRGB<>+0(SB)/8, $0x0908060504020100
DATA shufRGB<>+8(SB)/8, $0x808080800e0d0c0a
GLOBL shufRGB<>(SB), RODATA|NOPTR, $16

// 255 as a float32.
DATA f255<>+0(SB)/4, $0x437f0000
GLOBL f255<>(SB), RODATA|NOPTR, $4

// func rgbaCellsAVX2(dst *float32, src *byte, cells, groups, srcCell, dstCell int)
//
// For each of cells cells: convert groups groups of 4 RGBA pixels (16
// bytes from src) into 12 float32 values (48 bytes at dst), then step src
// by srcCell bytes and dst by dstCell bytes. Each value is float32(b)/255
// by VDIVPS, correctly rounded as IEEE 754 requires, so it is bit for bit
// the portable path's value. (Measured faster here than multiplying by
// 1/255 in float64 and converting, which is also exact.)
TEXT ·rgbaCellsAVX2(SB), NOSPLIT, $0-48
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ cells+16(FP), CX
	MOVQ groups+24(FP), R8
	MOVQ srcCell+32(FP), R9
	MOVQ dstCell+40(FP), R10
	VMOVDQU shufRGB<>(SB), X6
	VBROADCASTSS f255<>(SB), Y7

dcell:
	TESTQ CX, CX
	JZ    ddone
	MOVQ  SI, R11
	MOVQ  DI, R12
	MOVQ  R8, DX

dgroup:
	TESTQ DX, DX
	JZ    dnextcell
	VMOVDQU   (R11), X0
	VPSHUFB   X6, X0, X0
	VPMOVZXBD X0, Y1
	VPSRLDQ   $8, X0, X2
	VPMOVZXBD X2, X2
	VCVTDQ2PS Y1, Y1
	VCVTDQ2PS X2, X2
	VDIVPS    Y7, Y1, Y1
	VDIVPS    X7, X2, X2
	VMOVUPS   Y1, (R12)
	VMOVUPS   X2, 32(R12)
	ADDQ      $16, R11
	ADDQ      $48, R12
	DECQ      DX
	JMP       dgroup

dnextcell:
	ADDQ R9, SI
	ADDQ R10, DI
	DECQ CX
	JMP  dcell

ddone:
	VZEROUPPER
	RET
