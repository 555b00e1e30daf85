//go:build amd64 && !purego

#include "textflag.h"

// Byte shuffle: the R, G, B bytes of four RGBA pixels to the first 12
// bytes (alpha dropped), the rest zero.
DATA shufRGB<>+0(SB)/8, $0x0908060504020100
DATA shufRGB<>+8(SB)/8, $0x808080800e0d0c0a
GLOBL shufRGB<>(SB), RODATA|NOPTR, $16

// float32(1/255) = 0x3b808081.
DATA r255<>+0(SB)/4, $0x3b808081
GLOBL r255<>(SB), RODATA|NOPTR, $4

// func rgbaCellsAVX2(dst *float32, src *byte, cells, groups, srcCell, dstCell int)
//
// For each of cells cells: convert groups groups of 4 RGBA pixels (16
// bytes from src) into 12 float32 values (48 bytes at dst), then step src
// by srcCell bytes and dst by dstCell bytes.
//
// Each value is float32(b)/255 without a division, as fma(b, hi, b·lo)
// with hi = float32(1/255) and lo ≈ 1/255 − hi (see rgbaFrame8AVX2): for
// every byte the correctly rounded quotient, bit for bit the portable
// path's value; TestSIMDExhaustive checks all 256.
TEXT ·rgbaCellsAVX2(SB), NOSPLIT, $0-48
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ cells+16(FP), CX
	MOVQ groups+24(FP), R8
	MOVQ srcCell+32(FP), R9
	MOVQ dstCell+40(FP), R10
	VMOVDQU shufRGB<>(SB), X6
	VBROADCASTSS r255<>(SB), Y7
	VBROADCASTSS r255lo<>(SB), Y8

cell:
	TESTQ CX, CX
	JZ    done
	MOVQ  SI, R11
	MOVQ  DI, R12
	MOVQ  R8, DX

group:
	TESTQ DX, DX
	JZ    nextcell
	VMOVDQU     (R11), X0
	VPSHUFB     X6, X0, X0
	VPMOVZXBD   X0, Y1
	VPSRLDQ     $8, X0, X2
	VPMOVZXBD   X2, X2
	VCVTDQ2PS   Y1, Y1
	VCVTDQ2PS   X2, X2
	VMULPS      Y8, Y1, Y3
	VMULPS      X8, X2, X4
	VFMADD231PS Y7, Y1, Y3
	VFMADD231PS X7, X2, X4
	VMOVUPS     Y3, (R12)
	VMOVUPS     X4, 32(R12)
	ADDQ        $16, R11
	ADDQ        $48, R12
	DECQ        DX
	JMP         group

nextcell:
	ADDQ R9, SI
	ADDQ R10, DI
	DECQ CX
	JMP  cell

done:
	VZEROUPPER
	RET

// Per-lane VPSHUFB indexes that spread bytes into dwords (0x80 zeroes a
// byte): A takes bytes 0,1,2,4 of a lane, B bytes 5,6,8,9, C bytes
// 10,12,13,14. For 8 RGBA pixels (32 bytes) the 24 values are
// A(p0..3)|B(p0..3), C(p0..3)|A(p4..7) and B(p4..7)|C(p4..7), where
// p0..3 are the first 16 bytes and p4..7 the last.
DATA spread0<>+0(SB)/8, $0x8080800180808000
DATA spread0<>+8(SB)/8, $0x8080800480808002
DATA spread0<>+16(SB)/8, $0x8080800680808005
DATA spread0<>+24(SB)/8, $0x8080800980808008
GLOBL spread0<>(SB), RODATA|NOPTR, $32
DATA spread1<>+0(SB)/8, $0x8080800c8080800a
DATA spread1<>+8(SB)/8, $0x8080800e8080800d
DATA spread1<>+16(SB)/8, $0x8080800180808000
DATA spread1<>+24(SB)/8, $0x8080800480808002
GLOBL spread1<>(SB), RODATA|NOPTR, $32
DATA spread2<>+0(SB)/8, $0x8080800680808005
DATA spread2<>+8(SB)/8, $0x8080800980808008
DATA spread2<>+16(SB)/8, $0x8080800c8080800a
DATA spread2<>+24(SB)/8, $0x8080800e8080800d
GLOBL spread2<>(SB), RODATA|NOPTR, $32

// float32(1/255) split in two: hi = 0x3b808081 (as r255) and
// lo = 0xaf7efeff ≈ 1/255 − hi.
DATA r255lo<>+0(SB)/4, $0xaf7efeff
GLOBL r255lo<>(SB), RODATA|NOPTR, $4

// func rgbaFrame8AVX2(dst *float32, src *byte, rows, cells, groups, srcStride, srcCell, dstCell, ph, rowBytes, gridRowBytes int)
//
// rgbaCellsAVX2 for rows consecutive frame rows of a grid whose strides
// equal its patch size, taking 8 pixels (32 bytes → 24 values) a step:
// frame row y starts at src + y·srcStride and goes to
// dst + (y/ph)·gridRowBytes + (y%ph)·rowBytes; groups counts 8-pixel
// groups of a cell. One call converts the whole frame.
//
// Bytes reach dwords by one in-lane VPSHUFB per 8 values (two of the
// three loads broadcast a 16-byte half to both lanes). Each value is
// fma(b, hi, b·lo) with hi + lo ≈ 1/255 to 48 bits: two operations where
// a multiply with a fused correction step takes three. For every byte it
// is the correctly rounded float32(b)/255 (checked with exact rational
// arithmetic over all 256 bytes when written, and on the hardware against
// Go's IEEE division by TestSIMDExhaustive).
TEXT ·rgbaFrame8AVX2(SB), NOSPLIT, $0-88
	// The caller guarantees rows, cells and groups ≥ 1.
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ rows+16(FP), BX
	MOVQ srcCell+48(FP), R9
	MOVQ dstCell+56(FP), R10
	VMOVDQU spread0<>(SB), Y11
	VMOVDQU spread1<>(SB), Y12
	VMOVDQU spread2<>(SB), Y13
	VBROADCASTSS r255<>(SB), Y7
	VBROADCASTSS r255lo<>(SB), Y8
	XORQ R13, R13

erow:
	MOVQ  R13, AX
	IMULQ rowBytes+72(FP), AX
	ADDQ  DI, AX
	MOVQ  SI, R8
	MOVQ  cells+24(FP), CX

ecell:
	MOVQ R8, R11
	MOVQ AX, R12
	MOVQ groups+32(FP), DX

egroup:
	VBROADCASTI128 (R11), Y0
	VMOVDQU        (R11), Y1
	VBROADCASTI128 16(R11), Y2
	VPSHUFB        Y11, Y0, Y0
	VPSHUFB        Y12, Y1, Y1
	VPSHUFB        Y13, Y2, Y2
	VCVTDQ2PS      Y0, Y0
	VCVTDQ2PS      Y1, Y1
	VCVTDQ2PS      Y2, Y2
	VMULPS         Y8, Y0, Y3
	VMULPS         Y8, Y1, Y4
	VMULPS         Y8, Y2, Y5
	VFMADD231PS    Y7, Y0, Y3
	VFMADD231PS    Y7, Y1, Y4
	VFMADD231PS    Y7, Y2, Y5
	VMOVUPS        Y3, (R12)
	VMOVUPS        Y4, 32(R12)
	VMOVUPS        Y5, 64(R12)
	ADDQ           $32, R11
	ADDQ           $96, R12
	DECQ           DX
	JNZ            egroup

	ADDQ R9, R8
	ADDQ R10, AX
	DECQ CX
	JNZ  ecell

	ADDQ srcStride+40(FP), SI
	INCQ R13
	CMPQ R13, ph+64(FP)
	JLT  esame
	XORQ R13, R13
	ADDQ gridRowBytes+80(FP), DI

esame:
	DECQ BX
	JNZ  erow

	VZEROUPPER
	RET

// VPERMB indexes for 16 RGBA pixels (64 bytes) → 48 values in three
// registers: dword k of register m takes byte 4·⌊i/3⌋ + i mod 3 of the
// pixels, i = 16m + k, into its low byte (the other three bytes are
// zeroed by the mask 0x1111…).
DATA permRGB<>+0(SB)/8, $0x0000000100000000
DATA permRGB<>+8(SB)/8, $0x0000000400000002
DATA permRGB<>+16(SB)/8, $0x0000000600000005
DATA permRGB<>+24(SB)/8, $0x0000000900000008
DATA permRGB<>+32(SB)/8, $0x0000000c0000000a
DATA permRGB<>+40(SB)/8, $0x0000000e0000000d
DATA permRGB<>+48(SB)/8, $0x0000001100000010
DATA permRGB<>+56(SB)/8, $0x0000001400000012
DATA permRGB<>+64(SB)/8, $0x0000001600000015
DATA permRGB<>+72(SB)/8, $0x0000001900000018
DATA permRGB<>+80(SB)/8, $0x0000001c0000001a
DATA permRGB<>+88(SB)/8, $0x0000001e0000001d
DATA permRGB<>+96(SB)/8, $0x0000002100000020
DATA permRGB<>+104(SB)/8, $0x0000002400000022
DATA permRGB<>+112(SB)/8, $0x0000002600000025
DATA permRGB<>+120(SB)/8, $0x0000002900000028
DATA permRGB<>+128(SB)/8, $0x0000002c0000002a
DATA permRGB<>+136(SB)/8, $0x0000002e0000002d
DATA permRGB<>+144(SB)/8, $0x0000003100000030
DATA permRGB<>+152(SB)/8, $0x0000003400000032
DATA permRGB<>+160(SB)/8, $0x0000003600000035
DATA permRGB<>+168(SB)/8, $0x0000003900000038
DATA permRGB<>+176(SB)/8, $0x0000003c0000003a
DATA permRGB<>+184(SB)/8, $0x0000003e0000003d
GLOBL permRGB<>(SB), RODATA|NOPTR, $192

// func rgbaFrame8AVX512(dst *float32, src *byte, rows, pairs, srcStride, dstCell, ph, rowBytes, gridRowBytes int)
//
// rgbaFrame8AVX2 for patch width 8 with AVX-512 (F and VBMI), taking two
// neighbouring cells (16 pixels, 64 bytes → 48 values) a step: pairs
// counts the cell pairs of a frame row, dstCell is the distance of two
// tokens in bytes. Three zero-masked VPERMB put each value's byte in a
// dword; the conversion is rgbaFrame8AVX2's fma(b, hi, b·lo).
TEXT ·rgbaFrame8AVX512(SB), NOSPLIT, $0-72
	// The caller guarantees rows and pairs ≥ 1.
	MOVQ    dst+0(FP), DI
	MOVQ    src+8(FP), SI
	MOVQ    rows+16(FP), BX
	MOVQ    dstCell+40(FP), R10
	MOVQ    $0x1111111111111111, AX
	KMOVQ   AX, K1
	VMOVDQU64 permRGB<>+0(SB), Z11
	VMOVDQU64 permRGB<>+64(SB), Z12
	VMOVDQU64 permRGB<>+128(SB), Z13
	VBROADCASTSS r255<>(SB), Z7
	VBROADCASTSS r255lo<>(SB), Z8
	XORQ    R13, R13

zrow:
	MOVQ  R13, AX
	IMULQ rowBytes+56(FP), AX
	ADDQ  DI, AX
	MOVQ  SI, R8
	MOVQ  pairs+24(FP), CX

zpair:
	LEAQ        (AX)(R10*1), R14
	VPERMB.Z    (R8), Z11, K1, Z0
	VPERMB.Z    (R8), Z12, K1, Z1
	VPERMB.Z    (R8), Z13, K1, Z2
	VCVTDQ2PS   Z0, Z0
	VCVTDQ2PS   Z1, Z1
	VCVTDQ2PS   Z2, Z2
	VMULPS      Z8, Z0, Z3
	VMULPS      Z8, Z1, Z4
	VMULPS      Z8, Z2, Z5
	VFMADD231PS Z7, Z0, Z3
	VFMADD231PS Z7, Z1, Z4
	VFMADD231PS Z7, Z2, Z5
	VMOVUPS     Z3, (AX)
	VMOVUPS     Y4, 64(AX)
	VEXTRACTF64X4 $1, Z4, (R14)
	VMOVUPS     Z5, 32(R14)
	ADDQ        $64, R8
	LEAQ        (R14)(R10*1), AX
	DECQ        CX
	JNZ         zpair

	ADDQ srcStride+32(FP), SI
	INCQ R13
	CMPQ R13, ph+48(FP)
	JLT  zsame
	XORQ R13, R13
	ADDQ gridRowBytes+64(FP), DI

zsame:
	DECQ BX
	JNZ  zrow

	VZEROUPPER
	RET
