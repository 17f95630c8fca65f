package h5

import (
	"bytes"
	"encoding/binary"
	"math"
	"math/bits"

	"github.com/klauspost/compress/zlib"
)

// This file encodes whole chunks in Go as HDF5's stock filters would, so
// that the writer can store them with H5Dwrite_chunk and skip the
// library's pipeline (whose scale-offset filter calls pow() several times
// per element and whose deflate is zlib's). Every encoder here produces
// bytes the library's own decoders read back to the same values; the
// tests check that through HDF5, h5py and h5dump. Sources: HDF5 1.10
// source, H5Zscaleoffset.c, H5Zshuffle.c, H5Zdeflate.c, H5Zfletcher32.c,
// H5checksum.c; HDF5 File Format Specification, section III.I (filter
// pipeline message).

// soHeader is the size of the scale-offset filter's per-chunk header:
// minbits (4 bytes, little-endian), the size of the minimum (1 byte, 8),
// the minimum (8 bytes, little-endian) and 8 unused zero bytes.
const soHeader = 21

// Indexes into the scale-offset filter's client data (H5Zscaleoffset.c,
// H5Z_SCALEOFFSET_PARM_*).
const (
	soScaleType = 0 // 0 float D-scaling, 1 float E-scaling, 2 integer
	soFactor    = 1 // decimal digits D (float) or minbits (integer, 0 = computed)
	soNelmts    = 2 // elements per chunk
	soClass     = 3 // 0 integer, 1 float
	soSize      = 4 // bytes per element
	soSign      = 5 // integer: 0 unsigned, 1 two's complement
	soOrder     = 6 // 0 little-endian
	soFillAvail = 7 // 1 when the dataset's fill value is defined
	soFill      = 8 // fill value, 4 bytes per entry from the least significant
	soNParams   = 20
)

// scaleOffset holds one dataset's scale-offset parameters as HDF5 stored
// them at creation.
type scaleOffset struct {
	float bool
	size  int // 4 or 8 (integers), 8 (floats)
	// fill is the fill value's bit pattern; values equal to it (floats:
	// within 10^-D of it) are stored as the all-ones code and read back as
	// the fill value itself.
	fill uint64
	// p10 = pow(10, D) and p10neg = pow(10, -D), from the C library's pow
	// as the filter computes them (once per dataset here, per element
	// there).
	p10, p10neg float64
}

// newScaleOffset checks client data cd of a scale-offset filter and keeps
// what the encoder needs. ok is false for the variants the encoder does
// not produce (the library's path then stores them): E-scaling, a fixed
// minbits, big-endian or unsigned types, element sizes other than those
// of float64, int64 and int32, and an undefined fill value.
func newScaleOffset(cd []uint32, pow10 func(d int) (float64, float64)) (scaleOffset, bool) {
	if len(cd) != soNParams || cd[soOrder] != 0 || cd[soFillAvail] != 1 {
		return scaleOffset{}, false
	}
	so := scaleOffset{size: int(cd[soSize]), fill: uint64(cd[soFill]) | uint64(cd[soFill+1])<<32}
	switch {
	case cd[soClass] == 1 && cd[soScaleType] == 0 && so.size == 8:
		so.float = true
		so.p10, so.p10neg = pow10(int(int32(cd[soFactor])))
	case cd[soClass] == 0 && cd[soScaleType] == 2 && cd[soFactor] == 0 && cd[soSign] == 1 && (so.size == 8 || so.size == 4):
		if so.size == 4 {
			so.fill &= math.MaxUint32
		}
	default:
		return scaleOffset{}, false
	}
	return so, true
}

// ceilLog2 is the filter's H5Z__scaleoffset_log2: the number of bits
// needed for values 0..n-1, that is ceil(log2 n) (0 for n <= 1).
func ceilLog2(n uint64) int {
	if n <= 1 {
		return 0
	}
	return bits.Len64(n - 1)
}

// soFloat encodes a chunk of float64 values with the scale-offset
// filter in D-scaling mode, fill value defined (H5Zscaleoffset.c,
// H5Z_scaleoffset_precompress_3 with fill value):
//
//	min, max over values x with |x - fill| >= 10^-D
//	span    = llround(max 10^D - min 10^D) + 1
//	minbits = ceil(log2(span + 1))
//	code(x) = 2^minbits - 1                   if |x - fill| < 10^-D
//	          lround(x 10^D - min 10^D)       otherwise
//
// The products are rounded to float64 one by one, as the C code computes
// them (no fused multiply-add). The codes follow a 21-byte header
// (soHeader), packed minbits bits each, most significant bit first, into
// floor(n minbits / 8) + 1 zeroed bytes. The decoder computes code / 10^D
// + min. ok is false when the library must encode the chunk instead:
// a value that is not finite, or a range needing 63 bits or more (the
// filter then stores the values unscaled).
func (so *scaleOffset) soFloat(dst []byte, v []float64) ([]byte, bool) {
	fill := math.Float64frombits(so.fill)
	eps := so.p10neg
	var min, max float64
	found := false
	for _, x := range v {
		if math.IsInf(x, 0) || math.IsNaN(x) {
			return dst, false
		}
		if math.Abs(x-fill) < eps {
			continue
		}
		if !found {
			min, max, found = x, x, true
			continue
		}
		if x > max {
			max = x
		}
		if x < min {
			min = x
		}
	}
	mp := float64(min * so.p10)
	r := math.Round(float64(max*so.p10) - mp)
	if !(r >= 0 && r < 1<<62) {
		return dst, false
	}
	minbits := ceilLog2(uint64(r) + 2)
	if minbits >= 63 {
		return dst, false
	}
	dst = soHead(dst, minbits, math.Float64bits(min))
	all := uint64(1)<<minbits - 1
	p := newBitPacker(dst, len(v), minbits)
	for _, x := range v {
		var c uint64
		if math.Abs(x-fill) < eps {
			c = all
		} else {
			c = uint64(int64(math.Round(float64(x*so.p10) - mp)))
		}
		p.put(c & all)
	}
	return p.done(), true
}

// soInt encodes a chunk of signed integers with the scale-offset filter,
// minbits computed, fill value defined (H5Zscaleoffset.c,
// H5Z_scaleoffset_precompress_2 with fill value): min and max over values
// other than the fill value, minbits = ceil(log2(max - min + 2)), code
// x - min, or all ones for the fill value; header and packing as soFloat.
// size is the stored element size in bytes (4 or 8); the values are given
// widened to int64. ok is false when the range needs the full width.
func (so *scaleOffset) soInt(dst []byte, v []int64) ([]byte, bool) {
	fill := int64(so.fill)
	if so.size == 4 {
		fill = int64(int32(uint32(so.fill)))
	}
	var min, max int64
	found := false
	for _, x := range v {
		if x == fill {
			continue
		}
		if !found {
			min, max, found = x, x, true
			continue
		}
		if x > max {
			max = x
		}
		if x < min {
			min = x
		}
	}
	width := 8 * so.size
	span := uint64(max - min)
	if width == 32 {
		span &= math.MaxUint32
	}
	if span >= 1<<(width-1)-2 { // well inside the filter's own limit
		return dst, false
	}
	minbits := ceilLog2(span + 2)
	dst = soHead(dst, minbits, uint64(min))
	all := uint64(1)<<minbits - 1
	p := newBitPacker(dst, len(v), minbits)
	for _, x := range v {
		c := all
		if x != fill {
			c = uint64(x-min) & all
		}
		p.put(c)
	}
	return p.done(), true
}

// soHead appends the scale-offset chunk header.
func soHead(dst []byte, minbits int, minval uint64) []byte {
	var h [soHeader]byte
	binary.LittleEndian.PutUint32(h[0:], uint32(minbits))
	h[4] = 8
	binary.LittleEndian.PutUint64(h[5:], minval)
	return append(dst, h[:]...)
}

// bitPacker appends fixed-width codes most significant bit first, as
// H5Z__scaleoffset_compress does, into floor(n bits / 8) + 1 bytes.
type bitPacker struct {
	buf   []byte
	start int // first byte of the packed area in buf
	pos   int // next byte to fill
	acc   uint64
	nacc  int // bits held in acc
	width int
}

func newBitPacker(dst []byte, n, width int) *bitPacker {
	total := n*width/8 + 1
	start := len(dst)
	dst = append(dst, make([]byte, total)...)
	return &bitPacker{buf: dst, start: start, pos: start, width: width}
}

func (p *bitPacker) put(c uint64) {
	w := p.width
	if w == 0 {
		return
	}
	// acc holds fewer than 8 bits between calls; w <= 62 keeps the sum
	// within 64 bits once whole bytes are written out below.
	if p.nacc+w > 64 {
		hi := w - (64 - p.nacc)
		p.acc = p.acc<<(w-hi) | c>>hi
		p.nacc = 64
		p.flush()
		c &= 1<<hi - 1
		w = hi
	}
	p.acc = p.acc<<w | c
	p.nacc += w
	p.flush()
}

func (p *bitPacker) flush() {
	for p.nacc >= 8 {
		p.nacc -= 8
		p.buf[p.pos] = byte(p.acc >> p.nacc)
		p.pos++
	}
	p.acc &= 1<<p.nacc - 1
}

func (p *bitPacker) done() []byte {
	if p.nacc > 0 {
		p.buf[p.pos] = byte(p.acc << (8 - p.nacc))
	}
	return p.buf
}

// shuffleBytes is the shuffle filter (H5Zshuffle.c): byte j of element i
// goes to position j n + i, for n whole elements of size bytes; bytes
// after the last whole element stay at the end. Sizes of 1 and buffers
// of one element are left as they are.
func shuffleBytes(dst, src []byte, size int) []byte {
	n := len(src) / size
	if size <= 1 || n <= 1 {
		return append(dst, src...)
	}
	base := len(dst)
	dst = append(dst, make([]byte, len(src))...)
	out := dst[base:]
	for j := 0; j < size; j++ {
		o := out[j*n : (j+1)*n]
		for i := range o {
			o[i] = src[i*size+j]
		}
	}
	copy(out[n*size:], src[n*size:])
	return dst
}

// fletcher32 is HDF5's H5_checksum_fletcher32 (H5checksum.c): Fletcher's
// checksum over 16-bit words read big-endian (first byte high), both sums
// starting at 0 and folded (s & 0xffff) + (s >> 16) after every 360
// words; an odd last byte counts as a word with a zero low byte; the
// result is sum2 << 16 | sum1 after a final fold. The filter stores it
// after the data, little-endian (H5Zfletcher32.c, UINT32ENCODE).
func fletcher32(b []byte) uint32 {
	var s1, s2 uint32
	words := len(b) / 2
	i := 0
	for words > 0 {
		t := min(words, 360)
		words -= t
		for ; t > 0; t-- {
			s1 += uint32(b[i])<<8 | uint32(b[i+1])
			i += 2
			s2 += s1
		}
		s1 = s1&0xffff + s1>>16
		s2 = s2&0xffff + s2>>16
	}
	if len(b)%2 == 1 {
		s1 += uint32(b[i]) << 8
		s2 += s1
		s1 = s1&0xffff + s1>>16
		s2 = s2&0xffff + s2>>16
	}
	s1 = s1&0xffff + s1>>16
	s2 = s2&0xffff + s2>>16
	return s2<<16 | s1
}

// deflater compresses to a zlib stream (RFC 1950) as the deflate filter
// stores it (H5Zdeflate.c, compress2 at the dataset's level). The bytes
// differ from zlib's own, the stream decodes the same.
type deflater struct {
	level int
	zw    *zlib.Writer
	out   bytes.Buffer
}

func (d *deflater) deflate(dst, src []byte) ([]byte, error) {
	d.out.Reset()
	if d.zw == nil {
		zw, err := zlib.NewWriterLevel(&d.out, d.level)
		if err != nil {
			return dst, err
		}
		d.zw = zw
	} else {
		d.zw.Reset(&d.out)
	}
	if _, err := d.zw.Write(src); err != nil {
		return dst, err
	}
	if err := d.zw.Close(); err != nil {
		return dst, err
	}
	return append(dst, d.out.Bytes()...), nil
}
