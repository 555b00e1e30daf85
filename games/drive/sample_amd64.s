//go:build amd64 && !purego

#include "textflag.h"

// The high 16 bits of a 32-bit lane.
DATA hiHalves<>+0(SB)/4, $0xffff0000
GLOBL hiHalves<>(SB), RODATA|NOPTR, $4

// func sampleGather8(out *byte, pix *uint32, outStride, rows, groups int, set *gatherSetup)
//
// For each of rows frame rows: for each of groups groups of 8 columns,
// lane k holds the 16.16 position (u, v) of one sample; the pixel index
// is (u>>16) + (v>>16)·width, made by putting u>>16 in the lane's low
// half and v's high half above it (VPBLENDW) and one VPMADDWD with
// (1, width); VPGATHERDD fetches the 8 world pixels and one store writes
// them. The positions step by the group's steps along the row and by
// (dur, dvr) from row to row, in the same int32 arithmetic as the
// portable sampler, so every sample is the same pixel.
//
// gatherSetup: u [16]int32 at 0, v at 64, du 128, dv 132, dur 136,
// dvr 140, mul 144.
TEXT ·sampleGather8(SB), NOSPLIT, $0-48
	MOVQ         out+0(FP), DI
	MOVQ         pix+8(FP), SI
	MOVQ         outStride+16(FP), R8
	MOVQ         rows+24(FP), CX
	MOVQ         groups+32(FP), R9
	MOVQ         set+40(FP), AX
	VMOVDQU      0(AX), Y0         // u of the row's first group
	VMOVDQU      64(AX), Y1        // v
	VPBROADCASTD 128(AX), Y2       // du per group
	VPBROADCASTD 132(AX), Y3       // dv per group
	VPBROADCASTD 136(AX), Y4       // dur
	VPBROADCASTD 140(AX), Y5       // dvr
	VPBROADCASTD 144(AX), Y6       // (1, width)

row8:
	VMOVDQA Y0, Y7
	VMOVDQA Y1, Y8
	MOVQ    DI, R10
	MOVQ    R9, R11

group8:
	VPSRLD     $16, Y7, Y9
	VPBLENDW   $0xaa, Y8, Y9, Y9   // high halves from v
	VPMADDWD   Y6, Y9, Y9          // x + y·width
	VPCMPEQD   Y10, Y10, Y10       // gather mask: every lane
	VPXOR      Y11, Y11, Y11       // no dependence on the last gather
	VPGATHERDD Y10, (SI)(Y9*4), Y11
	VMOVDQU    Y11, (R10)
	VPADDD     Y2, Y7, Y7
	VPADDD     Y3, Y8, Y8
	ADDQ       $32, R10
	DECQ       R11
	JNZ        group8

	VPADDD Y4, Y0, Y0
	VPADDD Y5, Y1, Y1
	ADDQ   R8, DI
	DECQ   CX
	JNZ    row8
	VZEROUPPER
	RET

// func sampleGather16(out *byte, pix *uint32, outStride, rows, groups int, set *gatherSetup)
//
// sampleGather8 with 16 lanes (AVX-512 F and BW): the halves are merged
// with VPTERNLOGD (low bits of u>>16, high bits of v).
TEXT ·sampleGather16(SB), NOSPLIT, $0-48
	MOVQ         out+0(FP), DI
	MOVQ         pix+8(FP), SI
	MOVQ         outStride+16(FP), R8
	MOVQ         rows+24(FP), CX
	MOVQ         groups+32(FP), R9
	MOVQ         set+40(FP), AX
	VMOVDQU32    0(AX), Z0
	VMOVDQU32    64(AX), Z1
	VPBROADCASTD 128(AX), Z2
	VPBROADCASTD 132(AX), Z3
	VPBROADCASTD 136(AX), Z4
	VPBROADCASTD 140(AX), Z5
	VPBROADCASTD 144(AX), Z6
	VPBROADCASTD hiHalves<>(SB), Z12

row16:
	VMOVDQA32 Z0, Z7
	VMOVDQA32 Z1, Z8
	MOVQ      DI, R10
	MOVQ      R9, R11

group16:
	VPSRLD     $16, Z7, Z9
	VPTERNLOGD $0xf8, Z12, Z8, Z9  // Z9 | (Z8 & high halves)
	VPMADDWD   Z6, Z9, Z9
	KXNORW     K1, K1, K1
	VPXORD     Z11, Z11, Z11
	VPGATHERDD (SI)(Z9*4), K1, Z11
	VMOVDQU32  Z11, (R10)
	VPADDD     Z2, Z7, Z7
	VPADDD     Z3, Z8, Z8
	ADDQ       $64, R10
	DECQ       R11
	JNZ        group16

	VPADDD Z4, Z0, Z0
	VPADDD Z5, Z1, Z1
	ADDQ   R8, DI
	DECQ   CX
	JNZ    row16
	VZEROUPPER
	RET
