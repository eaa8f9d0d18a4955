package fft

import (
	"os"

	"golang.org/x/sys/cpu"
)

// useAVX2 selects the assembly path of [Block] and [Bands], chosen at run
// time from the CPU's features; PIPIT_NOASM=1 in the environment forces
// the portable path.
var useAVX2 = cpu.X86.HasAVX2 && cpu.X86.HasFMA && os.Getenv("PIPIT_NOASM") != "1"

// BlockSIMD reports whether [Block] and [Bands] run their AVX2 path.
func BlockSIMD() bool { return useAVX2 }

// loadAVX2 packs 8 windowed frames (block_amd64.s): for each group of 8
// samples, an 8×8 transpose turns 8 frame rows into 8 sample vectors,
// each is multiplied by its window value, even samples go to re and odd
// ones to im. n is a multiple of 8.
//
//go:noescape
func loadAVX2(re, im *float32, frames *[Lanes]*float32, win *float32, n int)

// difAVX2 runs the radix-2 decimation-in-frequency stages of span h,
// h/2, .., 1 of an m-point transform on (m, 8) re, im (block_amd64.s).
//
//go:noescape
func difAVX2(re, im, twr, twi *float32, m, h int)

// dif4AVX2 runs the stages of span h and h/2 in one radix-4 pass, with
// the twiddles w, w², w³ of each j < h/2 in tw (block_amd64.s).
//
//go:noescape
func dif4AVX2(re, im, tw *float32, m, h int)

// clipAVX2 raises each lane of (rows, 8) v to its maximum minus below
// (block_amd64.s).
//
//go:noescape
func clipAVX2(v *float32, rows int, below float64)

// splitAVX2 writes bins 1..m-1 of the power (mag=0) or magnitude (mag=1)
// spectrum (block_amd64.s).
//
//go:noescape
func splitAVX2(dst, re, im *float32, rev *int32, spr, spi *float32, m, mag int)

// bandsAVX2 applies rows sparse rows (block_amd64.s).
//
//go:noescape
func bandsAVX2(dst, spec *float32, span *int32, w *float32, rows int)

// logAVX2 is [LogScaled] on n values, n a multiple of 4 (block_amd64.s).
//
//go:noescape
func logAVX2(v *float32, n int, floor, scale float64)
