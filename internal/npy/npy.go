package npy

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
)

// DType is an array element type supported by this package.
type DType int

// Supported element types.
const (
	Float32 DType = iota + 1
	Float64
	Complex64
	Complex128
)

// String returns the NumPy descr of the type, e.g. "<f4".
func (d DType) String() string {
	switch d {
	case Float32:
		return "<f4"
	case Float64:
		return "<f8"
	case Complex64:
		return "<c8"
	case Complex128:
		return "<c16"
	}
	return "invalid"
}

// Size returns the number of bytes of one element.
func (d DType) Size() int {
	switch d {
	case Float32:
		return 4
	case Float64, Complex64:
		return 8
	case Complex128:
		return 16
	}
	return 0
}

// Header describes an array as stored in a .npy file.
type Header struct {
	DType DType
	Shape []int
	// DataOffset is the byte offset of the first element.
	DataOffset int64
}

// Len returns the number of elements, or -1 on overflow.
func (h Header) Len() int64 {
	n := int64(1)
	for _, s := range h.Shape {
		if s < 0 {
			return -1
		}
		if s != 0 && n > math.MaxInt64/int64(s) {
			return -1
		}
		n *= int64(s)
	}
	return n
}

// Bytes returns the size of the data section in bytes, or -1 on overflow.
func (h Header) Bytes() int64 {
	n := h.Len()
	if n < 0 || n > math.MaxInt64/16 {
		return -1
	}
	return n * int64(h.DType.Size())
}

var magic = []byte("\x93NUMPY")

// maxHeaderLen bounds the header dictionary; NumPy itself refuses headers
// above 10 kB unless asked, so anything larger is malformed here.
const maxHeaderLen = 1 << 16

// ErrTruncated reports a data section shorter than the header promises.
var ErrTruncated = errors.New("truncated: the file holds fewer bytes than its header declares")

// ReadHeader parses and validates the header of a .npy stream. It reads only
// the header; the reader is left at the first data byte.
func ReadHeader(r io.Reader) (Header, error) {
	var pre [8]byte
	if _, err := io.ReadFull(r, pre[:]); err != nil {
		return Header{}, fmt.Errorf("not a .npy file: too short for the magic string")
	}
	if !bytes.Equal(pre[:6], magic) {
		return Header{}, fmt.Errorf("not a .npy file: bad magic string")
	}
	major, minor := pre[6], pre[7]
	var hlen int
	var off int64
	switch major {
	case 1:
		var b [2]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return Header{}, fmt.Errorf("truncated header")
		}
		hlen = int(binary.LittleEndian.Uint16(b[:]))
		off = 10
	case 2, 3:
		var b [4]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return Header{}, fmt.Errorf("truncated header")
		}
		v := binary.LittleEndian.Uint32(b[:])
		if v > maxHeaderLen {
			return Header{}, fmt.Errorf("header length %d exceeds %d bytes", v, maxHeaderLen)
		}
		hlen = int(v)
		off = 12
	default:
		return Header{}, fmt.Errorf("unsupported .npy format version %d.%d (want 1.0, 2.0 or 3.0)", major, minor)
	}
	if minor != 0 {
		return Header{}, fmt.Errorf("unsupported .npy format version %d.%d (want 1.0, 2.0 or 3.0)", major, minor)
	}
	buf := make([]byte, hlen)
	if _, err := io.ReadFull(r, buf); err != nil {
		return Header{}, fmt.Errorf("truncated header")
	}
	h, err := parseDict(string(buf))
	if err != nil {
		return Header{}, err
	}
	h.DataOffset = off + int64(hlen)
	return h, nil
}

// parseDict parses the Python literal dictionary of a .npy header, e.g.
// {'descr': '<f4', 'fortran_order': False, 'shape': (3, 64, 1266), }
func parseDict(s string) (Header, error) {
	s = strings.TrimRight(s, " \n\x00")
	if !strings.HasPrefix(s, "{") || !strings.HasSuffix(s, "}") {
		return Header{}, fmt.Errorf("malformed header: not a dictionary")
	}
	p := &dictParser{s: s[1 : len(s)-1]}
	var h Header
	var seenDescr, seenOrder, seenShape bool
	for {
		p.skipSpace()
		if p.done() {
			break
		}
		key, err := p.str()
		if err != nil {
			return Header{}, fmt.Errorf("malformed header: %v", err)
		}
		p.skipSpace()
		if !p.eat(':') {
			return Header{}, fmt.Errorf("malformed header: expected ':' after %q", key)
		}
		p.skipSpace()
		switch key {
		case "descr":
			if seenDescr {
				return Header{}, fmt.Errorf("malformed header: duplicate key 'descr'")
			}
			seenDescr = true
			d, err := p.str()
			if err != nil {
				return Header{}, fmt.Errorf("malformed header: descr: %v", err)
			}
			h.DType, err = parseDescr(d)
			if err != nil {
				return Header{}, err
			}
		case "fortran_order":
			if seenOrder {
				return Header{}, fmt.Errorf("malformed header: duplicate key 'fortran_order'")
			}
			seenOrder = true
			switch {
			case p.word("False"):
			case p.word("True"):
				return Header{}, fmt.Errorf("Fortran-ordered arrays are not supported; save the array in C order")
			default:
				return Header{}, fmt.Errorf("malformed header: fortran_order must be True or False")
			}
		case "shape":
			if seenShape {
				return Header{}, fmt.Errorf("malformed header: duplicate key 'shape'")
			}
			seenShape = true
			sh, err := p.tuple()
			if err != nil {
				return Header{}, fmt.Errorf("malformed header: shape: %v", err)
			}
			h.Shape = sh
		default:
			return Header{}, fmt.Errorf("malformed header: unknown key %q", key)
		}
		p.skipSpace()
		if !p.eat(',') {
			p.skipSpace()
			if !p.done() {
				return Header{}, fmt.Errorf("malformed header: expected ',' between entries")
			}
		}
	}
	if !seenDescr || !seenOrder || !seenShape {
		return Header{}, fmt.Errorf("malformed header: needs descr, fortran_order and shape")
	}
	if h.Len() < 0 || h.Bytes() < 0 {
		return Header{}, fmt.Errorf("shape %v overflows", h.Shape)
	}
	return h, nil
}

func parseDescr(d string) (DType, error) {
	switch d {
	case "<f4":
		return Float32, nil
	case "<f8":
		return Float64, nil
	case "<c8":
		return Complex64, nil
	case "<c16":
		return Complex128, nil
	}
	if len(d) > 0 && d[0] == '>' {
		return 0, fmt.Errorf("big-endian arrays (%q) are not supported; save as little-endian", d)
	}
	return 0, fmt.Errorf("unsupported dtype %q (want <f4, <f8, <c8 or <c16)", d)
}

type dictParser struct {
	s string
	i int
}

func (p *dictParser) done() bool { return p.i >= len(p.s) }

func (p *dictParser) skipSpace() {
	for p.i < len(p.s) && (p.s[p.i] == ' ' || p.s[p.i] == '\t' || p.s[p.i] == '\n') {
		p.i++
	}
}

func (p *dictParser) eat(c byte) bool {
	if p.i < len(p.s) && p.s[p.i] == c {
		p.i++
		return true
	}
	return false
}

func (p *dictParser) word(w string) bool {
	if strings.HasPrefix(p.s[p.i:], w) {
		p.i += len(w)
		return true
	}
	return false
}

func (p *dictParser) str() (string, error) {
	if p.i >= len(p.s) {
		return "", fmt.Errorf("expected a quoted string")
	}
	q := p.s[p.i]
	if q != '\'' && q != '"' {
		return "", fmt.Errorf("expected a quoted string")
	}
	end := strings.IndexByte(p.s[p.i+1:], q)
	if end < 0 {
		return "", fmt.Errorf("unterminated string")
	}
	v := p.s[p.i+1 : p.i+1+end]
	p.i += end + 2
	return v, nil
}

func (p *dictParser) tuple() ([]int, error) {
	if !p.eat('(') {
		return nil, fmt.Errorf("expected '('")
	}
	shape := []int{}
	for {
		p.skipSpace()
		if p.eat(')') {
			return shape, nil
		}
		j := p.i
		for j < len(p.s) && p.s[j] >= '0' && p.s[j] <= '9' {
			j++
		}
		if j == p.i {
			return nil, fmt.Errorf("expected a non-negative integer")
		}
		v, err := strconv.ParseInt(p.s[p.i:j], 10, 64)
		if err != nil || v > math.MaxInt32*int64(1<<16) {
			return nil, fmt.Errorf("dimension %s out of range", p.s[p.i:j])
		}
		shape = append(shape, int(v))
		if len(shape) > 32 {
			return nil, fmt.Errorf("too many dimensions")
		}
		p.i = j
		p.skipSpace()
		if !p.eat(',') {
			p.skipSpace()
			if !p.eat(')') {
				return nil, fmt.Errorf("expected ',' or ')'")
			}
			return shape, nil
		}
	}
}

// Open opens a .npy file and validates its header against the file size:
// the data section must hold exactly the bytes the header declares, and at
// most maxBytes (if maxBytes > 0). The returned reader is positioned at the
// first element; the caller closes the file.
func Open(path string, maxBytes int64) (*os.File, Header, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, Header{}, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, Header{}, err
	}
	if st.IsDir() {
		f.Close()
		return nil, Header{}, fmt.Errorf("is a directory, not a .npy file")
	}
	h, err := ReadHeader(f)
	if err != nil {
		f.Close()
		return nil, Header{}, err
	}
	want := h.Bytes()
	if maxBytes > 0 && want > maxBytes {
		f.Close()
		return nil, Header{}, fmt.Errorf("shape %v needs %d bytes, over the memory cap of %d bytes", h.Shape, want, maxBytes)
	}
	have := st.Size() - h.DataOffset
	if have < want {
		f.Close()
		return nil, Header{}, fmt.Errorf("%w (shape %v needs %d data bytes, file has %d)", ErrTruncated, h.Shape, want, have)
	}
	if have > want {
		f.Close()
		return nil, Header{}, fmt.Errorf("file holds %d data bytes after the header, more than the %d its shape %v declares", have, want, h.Shape)
	}
	return f, h, nil
}

// chunk is the number of bytes decoded per read.
const chunk = 1 << 20

// ReadFloat32 reads n little-endian float32 values into dst (grown as needed).
func ReadFloat32(r io.Reader, dst []float32, n int) ([]float32, error) {
	dst = grow(dst, n)
	buf := make([]byte, min(chunk, 4*n))
	for i := 0; i < n; {
		m := min(len(buf)/4, n-i)
		if _, err := io.ReadFull(r, buf[:4*m]); err != nil {
			return nil, ErrTruncated
		}
		for k := range m {
			dst[i+k] = math.Float32frombits(binary.LittleEndian.Uint32(buf[4*k:]))
		}
		i += m
	}
	return dst, nil
}

// ReadFloat64 reads n little-endian float64 values into dst (grown as needed).
func ReadFloat64(r io.Reader, dst []float64, n int) ([]float64, error) {
	dst = grow(dst, n)
	buf := make([]byte, min(chunk, 8*n))
	for i := 0; i < n; {
		m := min(len(buf)/8, n-i)
		if _, err := io.ReadFull(r, buf[:8*m]); err != nil {
			return nil, ErrTruncated
		}
		for k := range m {
			dst[i+k] = math.Float64frombits(binary.LittleEndian.Uint64(buf[8*k:]))
		}
		i += m
	}
	return dst, nil
}

// ReadComplex64 reads n little-endian complex64 values into dst.
func ReadComplex64(r io.Reader, dst []complex64, n int) ([]complex64, error) {
	dst = grow(dst, n)
	buf := make([]byte, min(chunk, 8*n))
	for i := 0; i < n; {
		m := min(len(buf)/8, n-i)
		if _, err := io.ReadFull(r, buf[:8*m]); err != nil {
			return nil, ErrTruncated
		}
		for k := range m {
			re := math.Float32frombits(binary.LittleEndian.Uint32(buf[8*k:]))
			im := math.Float32frombits(binary.LittleEndian.Uint32(buf[8*k+4:]))
			dst[i+k] = complex(re, im)
		}
		i += m
	}
	return dst, nil
}

// ReadComplex128 reads n little-endian complex128 values into dst.
func ReadComplex128(r io.Reader, dst []complex128, n int) ([]complex128, error) {
	dst = grow(dst, n)
	buf := make([]byte, min(chunk, 16*n))
	for i := 0; i < n; {
		m := min(len(buf)/16, n-i)
		if _, err := io.ReadFull(r, buf[:16*m]); err != nil {
			return nil, ErrTruncated
		}
		for k := range m {
			re := math.Float64frombits(binary.LittleEndian.Uint64(buf[16*k:]))
			im := math.Float64frombits(binary.LittleEndian.Uint64(buf[16*k+8:]))
			dst[i+k] = complex(re, im)
		}
		i += m
	}
	return dst, nil
}

func grow[T any](dst []T, n int) []T {
	if cap(dst) >= n {
		return dst[:n]
	}
	return make([]T, n)
}

// WriteHeader writes a version 1.0 header (or 2.0 if the dictionary does not
// fit), padded so that the data starts on a 64-byte boundary as NumPy does.
func WriteHeader(w io.Writer, dt DType, shape []int) error {
	var sb strings.Builder
	sb.WriteString("{'descr': '")
	sb.WriteString(dt.String())
	sb.WriteString("', 'fortran_order': False, 'shape': (")
	for i, s := range shape {
		if i > 0 {
			sb.WriteString(", ")
		}
		sb.WriteString(strconv.Itoa(s))
	}
	if len(shape) == 1 {
		sb.WriteString(",")
	}
	sb.WriteString("), }")
	dict := sb.String()
	pre := 10
	major := byte(1)
	if len(dict)+1+pre > math.MaxUint16 {
		major, pre = 2, 12
	}
	total := pre + len(dict) + 1
	pad := (64 - total%64) % 64
	hlen := len(dict) + pad + 1
	var out bytes.Buffer
	out.Write(magic)
	out.WriteByte(major)
	out.WriteByte(0)
	if major == 1 {
		binary.Write(&out, binary.LittleEndian, uint16(hlen))
	} else {
		binary.Write(&out, binary.LittleEndian, uint32(hlen))
	}
	out.WriteString(dict)
	out.WriteString(strings.Repeat(" ", pad))
	out.WriteByte('\n')
	_, err := w.Write(out.Bytes())
	return err
}

// WriteFloat32 writes a float32 array of the given shape.
func WriteFloat32(w io.Writer, shape []int, v []float32) error {
	checkLen(shape, len(v))
	if err := WriteHeader(w, Float32, shape); err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, chunk)
	var b [4]byte
	for _, x := range v {
		binary.LittleEndian.PutUint32(b[:], math.Float32bits(x))
		bw.Write(b[:])
	}
	return bw.Flush()
}

// WriteFloat64 writes a float64 array of the given shape.
func WriteFloat64(w io.Writer, shape []int, v []float64) error {
	checkLen(shape, len(v))
	if err := WriteHeader(w, Float64, shape); err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, chunk)
	var b [8]byte
	for _, x := range v {
		binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
		bw.Write(b[:])
	}
	return bw.Flush()
}

// WriteComplex64 writes a complex64 array of the given shape.
func WriteComplex64(w io.Writer, shape []int, v []complex64) error {
	checkLen(shape, len(v))
	if err := WriteHeader(w, Complex64, shape); err != nil {
		return err
	}
	bw := bufio.NewWriterSize(w, chunk)
	var b [8]byte
	for _, x := range v {
		binary.LittleEndian.PutUint32(b[:], math.Float32bits(real(x)))
		binary.LittleEndian.PutUint32(b[4:], math.Float32bits(imag(x)))
		bw.Write(b[:])
	}
	return bw.Flush()
}

// checkLen panics when the slice does not match the shape: a programmer error.
func checkLen(shape []int, n int) {
	m := 1
	for _, s := range shape {
		m *= s
	}
	if m != n {
		panic(fmt.Sprintf("npy: shape %v holds %d elements, slice has %d", shape, m, n))
	}
}
