package export

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"math"
	"strings"
)

// NumPy's .npy format, version 1.0 (NumPy documentation, "numpy.lib.format":
// the magic string "\x93NUMPY", major and minor version bytes 1 and 0, a
// little-endian uint16 HEADER_LEN, then an ASCII Python dict literal with
// the keys descr, fortran_order and shape, padded with spaces and ended by
// '\n' so that the data start at a multiple of 64 bytes; then the raw
// values in C order).
const (
	npyMagic = "\x93NUMPY"
	npyAlign = 64
	// npyMaxHeader is the largest HEADER_LEN a version 1.0 file can hold.
	npyMaxHeader = math.MaxUint16
)

// npyHeader is the preamble of a version 1.0 .npy file holding an array
// of descr ('<f8' or '<i8') with the given shape, C order.
func npyHeader(descr string, shape []int) ([]byte, error) {
	var dims []string
	for _, d := range shape {
		dims = append(dims, fmt.Sprint(d))
	}
	tuple := "(" + strings.Join(dims, ", ")
	if len(dims) == 1 {
		tuple += "," // a one-element Python tuple
	}
	tuple += ")"
	dict := fmt.Sprintf("{'descr': '%s', 'fortran_order': False, 'shape': %s, }", descr, tuple)
	pre := len(npyMagic) + 2 + 2
	total := pre + len(dict) + 1 // + '\n'
	pad := (npyAlign - total%npyAlign) % npyAlign
	hlen := len(dict) + pad + 1
	if hlen > npyMaxHeader {
		return nil, fmt.Errorf("export: .npy header of %d bytes is too long for format 1.0", hlen)
	}
	b := make([]byte, 0, pre+hlen)
	b = append(b, npyMagic...)
	b = append(b, 1, 0)
	b = binary.LittleEndian.AppendUint16(b, uint16(hlen))
	b = append(b, dict...)
	b = append(b, strings.Repeat(" ", pad)...)
	return append(b, '\n'), nil
}

// npyWriter streams the values of one .npy array.
type npyWriter struct {
	w       *bufio.Writer
	integer bool
	buf     [8]byte
}

func (n *npyWriter) put(v float64) {
	if n.integer {
		binary.LittleEndian.PutUint64(n.buf[:], uint64(int64(v)))
	} else {
		binary.LittleEndian.PutUint64(n.buf[:], math.Float64bits(v))
	}
	n.w.Write(n.buf[:])
}
