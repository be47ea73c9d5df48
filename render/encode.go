package render

import (
	"bytes"
	"compress/flate"
	"encoding/binary"
	"hash/adler32"
	"hash/crc32"
	"image"
	"io"
	"runtime"
	"sync"
)

// encodeRGB writes an opaque RGBA image as an 8-bit RGB PNG (W3C, Portable
// Network Graphics (PNG) Specification, 2nd ed., 2003), compressing bands of
// rows on all cores.
//
// Why not image/png: a 3000 x 4250 map took image/png about 350 ms even at
// BestSpeed, most of it spent trying five filters on every row and testing
// every pixel for opacity, on one core — over a third of the budget for a
// whole map. Here every row uses the Up filter (PNG spec, section 9.2),
// which suits smooth fields, and the image is split into bands that are
// deflated concurrently, each ending in a sync flush so that the
// concatenated output is one valid deflate stream (RFC 1951, section 3.2.4:
// the flush ends in an empty stored block on a byte boundary; M. Adler's
// pigz uses the same construction). Back-references never cross a band, so
// the file is a little larger than a single-stream encoding would be. The
// zlib checksum of the whole stream is put together from the bands' Adler-32
// sums (adler32Combine). TestEncodeRoundTrip decodes the output with
// image/png and compares every pixel.
func encodeRGB(w io.Writer, img *image.RGBA) error {
	b := img.Bounds()
	width, height := b.Dx(), b.Dy()
	rowLen := 1 + 3*width

	bands := runtime.GOMAXPROCS(0) * 2
	bands = max(1, min(bands, height/64))
	type band struct {
		out   bytes.Buffer
		adler uint32
		n     int // filtered bytes
		err   error
	}
	parts := make([]band, bands)
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for k := range parts {
		wg.Add(1)
		go func() {
			defer wg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			p := &parts[k]
			y0, y1 := height*k/bands, height*(k+1)/bands
			zw, _ := flate.NewWriter(&p.out, flate.BestSpeed) // error only for a bad level
			h := adler32.New()
			row := make([]byte, rowLen)
			for y := y0; y < y1; y++ {
				filterRow(row, img, b.Min.Y+y)
				h.Write(row)
				if _, err := zw.Write(row); err != nil {
					p.err = err
					return
				}
			}
			if k == bands-1 {
				p.err = zw.Close()
			} else {
				p.err = zw.Flush()
			}
			p.adler, p.n = h.Sum32(), (y1-y0)*rowLen
		}()
	}
	wg.Wait()

	var hdr [13]byte
	binary.BigEndian.PutUint32(hdr[0:], uint32(width))
	binary.BigEndian.PutUint32(hdr[4:], uint32(height))
	hdr[8], hdr[9] = 8, 2 // bit depth 8, colour type 2 (truecolour)
	if _, err := io.WriteString(w, "\x89PNG\r\n\x1a\n"); err != nil {
		return err
	}
	if err := writeChunk(w, "IHDR", hdr[:]); err != nil {
		return err
	}
	// zlib stream (RFC 1950): CMF 0x78 (deflate, 32K window), FLG 0x01
	// (fastest, and 0x7801 is a multiple of 31), the deflate data, Adler-32.
	if err := writeChunk(w, "IDAT", []byte{0x78, 0x01}); err != nil {
		return err
	}
	sum := uint32(1) // Adler-32 of nothing
	for k := range parts {
		if parts[k].err != nil {
			return parts[k].err
		}
		if err := writeChunk(w, "IDAT", parts[k].out.Bytes()); err != nil {
			return err
		}
		sum = adler32Combine(sum, parts[k].adler, parts[k].n)
	}
	var tail [4]byte
	binary.BigEndian.PutUint32(tail[:], sum)
	if err := writeChunk(w, "IDAT", tail[:]); err != nil {
		return err
	}
	return writeChunk(w, "IEND", nil)
}

// filterRow writes row y of img as a filtered PNG scan line, alpha
// dropped: the filter type byte, then each RGB byte minus the byte above it
// (filter Up), or unchanged on the first row (filter None).
func filterRow(dst []byte, img *image.RGBA, y int) {
	n := 4 * img.Rect.Dx()
	off := img.PixOffset(img.Rect.Min.X, y)
	cur := img.Pix[off : off+n : off+n]
	out := dst[1 : 1+3*img.Rect.Dx()]
	if y == img.Rect.Min.Y {
		dst[0] = 0
		for i, j := 0, 0; i < n; i, j = i+4, j+3 {
			out[j], out[j+1], out[j+2] = cur[i], cur[i+1], cur[i+2]
		}
		return
	}
	dst[0] = 2
	prev := img.Pix[off-img.Stride : off-img.Stride+n : off-img.Stride+n]
	// Figures are mostly runs of pixels equal to the ones above (page,
	// panel, vertical lines): two pixels at a time, compared as one
	// 64-bit word, filter to six zero bytes.
	i, j := 0, 0
	for ; i+8 <= n; i, j = i+8, j+6 {
		if binary.LittleEndian.Uint64(cur[i:]) == binary.LittleEndian.Uint64(prev[i:]) {
			clear(out[j : j+6])
			continue
		}
		out[j] = cur[i] - prev[i]
		out[j+1] = cur[i+1] - prev[i+1]
		out[j+2] = cur[i+2] - prev[i+2]
		out[j+3] = cur[i+4] - prev[i+4]
		out[j+4] = cur[i+5] - prev[i+5]
		out[j+5] = cur[i+6] - prev[i+6]
	}
	for ; i < n; i, j = i+4, j+3 {
		out[j] = cur[i] - prev[i]
		out[j+1] = cur[i+1] - prev[i+1]
		out[j+2] = cur[i+2] - prev[i+2]
	}
}

// writeChunk writes one PNG chunk: length, type, data and the CRC-32 of type
// and data (PNG spec, section 5.3).
func writeChunk(w io.Writer, typ string, data []byte) error {
	var head [8]byte
	binary.BigEndian.PutUint32(head[:4], uint32(len(data)))
	copy(head[4:], typ)
	crc := crc32.NewIEEE()
	crc.Write(head[4:])
	crc.Write(data)
	var foot [4]byte
	binary.BigEndian.PutUint32(foot[:], crc.Sum32())
	for _, p := range [][]byte{head[:], data, foot[:]} {
		if _, err := w.Write(p); err != nil {
			return err
		}
	}
	return nil
}

// adler32Combine returns the Adler-32 checksum of the concatenation of two
// byte strings from their checksums a1 and a2 and the second's length n2:
// the first sum shifts by the second's sum of bytes, the second by n2 times
// the first's (the method of zlib's adler32_combine, J.-l. Gailly and
// M. Adler; checked against hash/adler32 in TestAdler32Combine).
func adler32Combine(a1, a2 uint32, n2 int) uint32 {
	const base = 65521 // largest prime below 2^16 (RFC 1950, section 8.2)
	rem := uint64(n2 % base)
	s1a, s2a := uint64(a1&0xffff), uint64(a1>>16)
	s1b, s2b := uint64(a2&0xffff), uint64(a2>>16)
	s1 := (s1a + s1b + base - 1) % base
	s2 := (rem*s1a%base + s2a + s2b + base - rem) % base
	return uint32(s1 | s2<<16)
}
