//go:build amd64 && !purego

#include "textflag.h"

// Byte shuffle: the R, G, B bytes of four RGBA pixels to the first 12
// bytes (alpha dropped), the rest zero.
DATA shufRGB<>+0(SB)/8, $0x0908060504020100
DATA shufRGB<>+8(SB)/8, $0x808080800e0d0c0a
GLOBL shufRGB<>(SB), RODATA|NOPTR, $16

// 1/255 as a float64 (0x3f70101010101010).
DATA inv255<>+0(SB)/8, $0x3f70101010101010
GLOBL inv255<>(SB), RODATA|NOPTR, $8

// func rgbaCellsAVX2(dst *float32, src *byte, cells, groups, srcCell, dstCell int)
//
// For each of cells cells: convert groups groups of 4 RGBA pixels (16
// bytes from src) into 12 float32 values (48 bytes at dst), then step src
// by srcCell bytes and dst by dstCell bytes. Each value is
// float32(float64(b) · (1/255)), which equals float32(b)/255 for every
// byte b (checked exhaustively by TestInverse255Exact).
TEXT ·rgbaCellsAVX2(SB), NOSPLIT, $0-48
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ cells+16(FP), CX
	MOVQ groups+24(FP), R8
	MOVQ srcCell+32(FP), R9
	MOVQ dstCell+40(FP), R10
	VMOVDQU shufRGB<>(SB), X6
	VBROADCASTSD inv255<>(SB), Y7

cell:
	TESTQ CX, CX
	JZ    done
	MOVQ  SI, R11
	MOVQ  DI, R12
	MOVQ  R8, DX

group:
	TESTQ DX, DX
	JZ    nextcell
	VMOVDQU      (R11), X0
	VPSHUFB      X6, X0, X0
	VPMOVZXBD    X0, Y1
	VPSRLDQ      $8, X0, X2
	VPMOVZXBD    X2, X2
	VCVTDQ2PD    X1, Y3
	VEXTRACTI128 $1, Y1, X4
	VCVTDQ2PD    X4, Y4
	VCVTDQ2PD    X2, Y5
	VMULPD       Y7, Y3, Y3
	VMULPD       Y7, Y4, Y4
	VMULPD       Y7, Y5, Y5
	VCVTPD2PSY   Y3, X3
	VCVTPD2PSY   Y4, X4
	VCVTPD2PSY   Y5, X5
	VMOVUPS      X3, (R12)
	VMOVUPS      X4, 16(R12)
	VMOVUPS      X5, 32(R12)
	ADDQ         $16, R11
	ADDQ         $48, R12
	DECQ         DX
	JMP          group

nextcell:
	ADDQ R9, SI
	ADDQ R10, DI
	DECQ CX
	JMP  cell

done:
	VZEROUPPER
	RET
