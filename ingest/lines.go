package ingest

import (
	"bufio"
	"bytes"
	"io"
	"unsafe"
)

// lineReader yields lines without their terminator (LF or CRLF), drops a
// UTF-8 byte-order mark at the start, and counts lines from 1.
type lineReader struct {
	br   *bufio.Reader
	line int
	buf  []byte
}

func newLineReader(r io.Reader) *lineReader {
	return &lineReader{br: bufio.NewReaderSize(r, lineBufferBytes)}
}

// lineBufferBytes is the read buffer of one source. Longer lines are
// joined in lineReader.buf, so it bounds no line; it is small because an
// ensemble opens several sources per trajectory twice (scan, then the
// conversion's fallback) and a large buffer's allocation and clearing
// cost more than its saved read calls (measured on 400 trajectories of
// 1,001 frames: 12.5 CPU s with 1 MiB, 10.5 with 64 KiB; one 81 MB
// trajectory the same within noise).
const lineBufferBytes = 64 << 10

// next returns the next line; the slice is valid until the next call of
// next or atEOF. io.EOF means no more lines.
func (l *lineReader) next() ([]byte, error) {
	l.buf = l.buf[:0]
	for {
		chunk, err := l.br.ReadSlice('\n')
		if err == nil && len(l.buf) == 0 {
			// The whole line is in bufio's buffer: use it there, uncopied.
			return l.trim(chunk), nil
		}
		l.buf = append(l.buf, chunk...)
		if err == bufio.ErrBufferFull {
			continue
		}
		if err == io.EOF && len(l.buf) == 0 {
			return nil, io.EOF
		}
		if err != nil && err != io.EOF {
			return nil, err
		}
		break
	}
	return l.trim(l.buf), nil
}

// trim counts line b and drops its terminator, and the byte-order mark of
// the first line.
func (l *lineReader) trim(b []byte) []byte {
	l.line++
	b = bytes.TrimSuffix(b, []byte("\n"))
	b = bytes.TrimSuffix(b, []byte("\r"))
	if l.line == 1 {
		b = bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))
	}
	return b
}

// atEOF reports whether no bytes are left.
func (l *lineReader) atEOF() bool {
	_, err := l.br.Peek(1)
	return err != nil
}

// field is one whitespace- or delimiter-separated field with its 1-based
// column.
type field struct {
	text string
	col  int
}

// splitFields splits on runs of spaces and tabs, or on sep when sep != 0
// (CSV/TSV: no quoting is supported in numeric tables; quoted fields are
// handled only in extended XYZ comment lines).
//
// The line is copied to a string once and every field is a view into it:
// one allocation per line instead of one per field (text parsing was the
// larger part of convert's CPU).
func splitFields(b []byte, sep byte, out []field) []field {
	return splitLine(b, string(b), sep, out)
}

// splitView is splitFields whose fields are views into b itself, valid
// only until b changes (the next line): no allocation per line. A caller
// that keeps a field's text beyond that copies it (strings.Clone);
// parsing and error messages use it at once.
func splitView(b []byte, sep byte, out []field) []field {
	if len(b) == 0 {
		return out[:0]
	}
	return splitLine(b, unsafe.String(&b[0], len(b)), sep, out)
}

// splitLine splits b, whose text is line, for splitFields and splitView.
func splitLine(b []byte, line string, sep byte, out []field) []field {
	out = out[:0]
	if sep != 0 {
		start := 0
		for i := 0; i <= len(b); i++ {
			if i == len(b) || b[i] == sep {
				f := bytes.TrimSpace(b[start:i])
				off := start + bytes.Index(b[start:i], f)
				if len(f) == 0 {
					off = start
				}
				out = append(out, field{line[off : off+len(f)], off + 1})
				start = i + 1
			}
		}
		return out
	}
	i := 0
	for i < len(b) {
		for i < len(b) && (b[i] == ' ' || b[i] == '\t') {
			i++
		}
		if i == len(b) {
			break
		}
		j := i
		for j < len(b) && b[j] != ' ' && b[j] != '\t' {
			j++
		}
		out = append(out, field{line[i:j], i + 1})
		i = j
	}
	return out
}
