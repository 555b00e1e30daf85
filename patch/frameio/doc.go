// Package frameio reads and writes frame sequences for tilebench: folders
// of PNG/JPEG frames, animated GIFs, NumPy .npy arrays (NEP 1), raw RGB24
// streams and built-in synthetic scenes on the way in; PNG sequences,
// animated GIFs, .npy arrays and contact sheets on the way out.
//
// Reading is streaming: a Reader hands out one frame at a time as an
// *image.RGBA that it reuses, so long inputs never sit in memory (an
// animated GIF is the exception: image/gif decodes it whole, but keeps it
// at one byte a pixel). Writing is streaming too for the PNG sequence and
// the .npy file; the GIF keeps its paletted frames (one byte a pixel) and
// the contact sheet keeps only the frames it shows.
//
// Every output file is written through internal/atomicfile (a temporary
// name, then a rename), and an Outputs set commits its files only when the
// whole sequence went through, so a failure leaves no half-written file.
package frameio
