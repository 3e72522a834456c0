package npy

import (
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// The files in testdata were written by NumPy 1.24.2 (Debian's
// /usr/bin/python3) from testdata/, with:
//
//	import numpy as np
//	np.save('f4_3d.npy', (np.arange(24, dtype='<f4') * 0.5 - 3).reshape(2, 3, 4))
//	np.save('f8_2d.npy', np.array([[0.0, -0.0, 1e-308, 5e-324], [np.pi, -np.e, 1.7976931348623157e308, 1 / 3]], dtype='<f8'))
//	np.save('c8_1d.npy', np.array([1 + 2j, -0.5 + 0.25j, 3 - 4j], dtype='<c8'))
//	np.save('c16_2d.npy', np.array([[1 / 3 + 1j / 7, -1j], [2.5, np.pi - 1j * np.e]], dtype='<c16'))
//	np.save('f8_empty.npy', np.zeros((0, 4), dtype='<f8'))
//	with open('f8_v2.npy', 'wb') as f:
//	    np.lib.format.write_array(f, np.array([1.5, -2.5], dtype='<f8'), version=(2, 0))
//	np.save('f4_fortran.npy', np.asfortranarray(np.arange(6, dtype='<f4').reshape(2, 3)))
//	np.save('f8_bigendian.npy', np.array([1.0, 2.0], dtype='>f8'))
//	np.save('i2.npy', np.array([1, 2, 3], dtype='<i2'))

func TestReadNumPyFiles(t *testing.T) {
	t.Parallel()
	f4 := make([]float32, 24)
	for i := range f4 {
		f4[i] = float32(i)*0.5 - 3
	}
	for _, c := range []struct {
		file  string
		dtype DType
		shape []int
		f32   []float32
		f64   []float64
		c64   []complex64
		c128  []complex128
	}{
		{file: "f4_3d.npy", dtype: Float32, shape: []int{2, 3, 4}, f32: f4},
		{file: "f8_2d.npy", dtype: Float64, shape: []int{2, 4},
			f64: []float64{0, math.Copysign(0, -1), 1e-308, 5e-324, math.Pi, -math.E, math.MaxFloat64, 1.0 / 3}},
		{file: "c8_1d.npy", dtype: Complex64, shape: []int{3}, c64: []complex64{1 + 2i, -0.5 + 0.25i, 3 - 4i}},
		{file: "c16_2d.npy", dtype: Complex128, shape: []int{2, 2},
			c128: []complex128{complex(1.0/3, 1.0/7), complex(math.Copysign(0, -1), -1), 2.5, complex(math.Pi, -math.E)}}, // Python -1j is -0-1j
		{file: "f8_empty.npy", dtype: Float64, shape: []int{0, 4}, f64: []float64{}},
		{file: "f8_v2.npy", dtype: Float64, shape: []int{2}, f64: []float64{1.5, -2.5}},
	} {
		t.Run(c.file, func(t *testing.T) {
			t.Parallel()
			path := filepath.Join("testdata", c.file)
			f, h, err := Open(path, 1<<20)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			if h.DType != c.dtype || !slices.Equal(h.Shape, c.shape) {
				t.Fatalf("header %v %v, want %v %v", h.DType, h.Shape, c.dtype, c.shape)
			}
			if h.DataOffset%64 != 0 {
				t.Errorf("data offset %d: NumPy aligns data to 64 bytes", h.DataOffset)
			}
			n := int(h.Len())
			var w bytes.Buffer // our writer's version of the same array
			switch c.dtype {
			case Float32:
				got, err := ReadFloat32(f, nil, n)
				if err != nil || !sameBits(got, c.f32) {
					t.Errorf("got %v, %v; want %v", got, err, c.f32)
				}
				WriteFloat32(&w, c.shape, c.f32)
			case Float64:
				got, err := ReadFloat64(f, nil, n)
				if err != nil || !sameBits(got, c.f64) {
					t.Errorf("got %v, %v; want %v", got, err, c.f64)
				}
				WriteFloat64(&w, c.shape, c.f64)
			case Complex64:
				got, err := ReadComplex64(f, nil, n)
				if err != nil || !sameBits(got, c.c64) {
					t.Errorf("got %v, %v; want %v", got, err, c.c64)
				}
				WriteComplex64(&w, c.shape, c.c64)
			case Complex128:
				got, err := ReadComplex128(f, nil, n)
				if err != nil || !sameBits(got, c.c128) {
					t.Errorf("got %v, %v; want %v", got, err, c.c128)
				}
				writeComplex128(&w, c.shape, c.c128)
			}
			// Our writer lays a version 1.0 file out byte for byte as NumPy
			// does (f8_v2.npy is version 2.0, which we write only for huge
			// headers).
			if c.file != "f8_v2.npy" {
				want, err := os.ReadFile(path)
				if err != nil {
					t.Fatal(err)
				}
				if !bytes.Equal(w.Bytes(), want) {
					t.Errorf("our file differs from NumPy's:\n ours %q\nnumpy %q", w.Bytes(), want)
				}
			}
		})
	}
}

func TestRejectNumPyFiles(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ file, want string }{
		{"f4_fortran.npy", "Fortran-ordered arrays are not supported"},
		{"f8_bigendian.npy", "big-endian"},
		{"i2.npy", `unsupported dtype "<i2"`},
	} {
		_, _, err := Open(filepath.Join("testdata", c.file), 0)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: got %v, want %q", c.file, err, c.want)
		}
	}
}

// sameBits compares float or complex slices bit for bit.
func sameBits[T float32 | float64 | complex64 | complex128](a, b []T) bool {
	if len(a) != len(b) {
		return false
	}
	var ba, bb bytes.Buffer
	binary.Write(&ba, binary.LittleEndian, a)
	binary.Write(&bb, binary.LittleEndian, b)
	return bytes.Equal(ba.Bytes(), bb.Bytes())
}

// writeComplex128 writes a complex128 array: the package reads the type but
// has no writer for it.
func writeComplex128(w io.Writer, shape []int, v []complex128) error {
	if err := WriteHeader(w, Complex128, shape); err != nil {
		return err
	}
	return binary.Write(w, binary.LittleEndian, v)
}

func TestRoundTrip(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	specials := []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(), 5e-324, math.MaxFloat64, -1e-300}
	shapes := [][]int{{7}, {3, 5}, {2, 3, 4}, {1, 1, 1}, {0}, {4, 0, 2}, {}}
	for _, dt := range []DType{Float32, Float64, Complex64, Complex128} {
		for _, shape := range shapes {
			h := Header{DType: dt, Shape: shape}
			n := int(h.Len())
			f64 := make([]float64, 2*n)
			for i := range f64 {
				f64[i] = rng.NormFloat64() * math.Pow(10, float64(rng.IntN(20)-10))
				if rng.IntN(4) == 0 {
					f64[i] = specials[rng.IntN(len(specials))]
				}
			}
			var buf bytes.Buffer
			var check func(r io.Reader) error
			switch dt {
			case Float32:
				v := make([]float32, n)
				for i := range v {
					v[i] = float32(f64[i])
				}
				WriteFloat32(&buf, shape, v)
				check = func(r io.Reader) error {
					got, err := ReadFloat32(r, nil, n)
					if err == nil && !sameBits(got, v) {
						err = errors.New("values differ")
					}
					return err
				}
			case Float64:
				v := f64[:n]
				WriteFloat64(&buf, shape, v)
				check = func(r io.Reader) error {
					got, err := ReadFloat64(r, nil, n)
					if err == nil && !sameBits(got, v) {
						err = errors.New("values differ")
					}
					return err
				}
			case Complex64:
				v := make([]complex64, n)
				for i := range v {
					v[i] = complex(float32(f64[2*i]), float32(f64[2*i+1]))
				}
				WriteComplex64(&buf, shape, v)
				check = func(r io.Reader) error {
					got, err := ReadComplex64(r, nil, n)
					if err == nil && !sameBits(got, v) {
						err = errors.New("values differ")
					}
					return err
				}
			case Complex128:
				v := make([]complex128, n)
				for i := range v {
					v[i] = complex(f64[2*i], f64[2*i+1])
				}
				writeComplex128(&buf, shape, v)
				check = func(r io.Reader) error {
					got, err := ReadComplex128(r, nil, n)
					if err == nil && !sameBits(got, v) {
						err = errors.New("values differ")
					}
					return err
				}
			}
			// Through a file, so that Open checks the size.
			path := filepath.Join(t.TempDir(), "a.npy")
			if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
			f, got, err := Open(path, 0)
			if err != nil {
				t.Fatalf("%v %v: %v", dt, shape, err)
			}
			if got.DType != dt || !slices.Equal(got.Shape, shape) || got.DataOffset%64 != 0 {
				t.Errorf("%v %v: header read back as %+v", dt, shape, got)
			}
			if err := check(f); err != nil {
				t.Errorf("%v %v: %v", dt, shape, err)
			}
			f.Close()
		}
	}
}

// TestReadLarge crosses the reader's chunk boundary.
func TestReadLarge(t *testing.T) {
	t.Parallel()
	n := chunk/4 + 3
	v := make([]float32, n)
	for i := range v {
		v[i] = float32(i)
	}
	var buf bytes.Buffer
	WriteFloat32(&buf, []int{n}, v)
	r := bytes.NewReader(buf.Bytes())
	if _, err := ReadHeader(r); err != nil {
		t.Fatal(err)
	}
	dst := make([]float32, 0, n) // reused, not reallocated
	got, err := ReadFloat32(r, dst, n)
	if err != nil || !sameBits(got, v) || &got[0] != &dst[:1][0] {
		t.Errorf("chunked read: %v, same backing array %v", err, len(got) > 0 && &got[0] == &dst[:1][0])
	}
}

func TestReadTruncated(t *testing.T) {
	t.Parallel()
	short := bytes.Repeat([]byte{1}, 15)
	for name, read := range map[string]func(io.Reader) error{
		"float32":    func(r io.Reader) error { _, err := ReadFloat32(r, nil, 4); return err },
		"float64":    func(r io.Reader) error { _, err := ReadFloat64(r, nil, 2); return err },
		"complex64":  func(r io.Reader) error { _, err := ReadComplex64(r, nil, 2); return err },
		"complex128": func(r io.Reader) error { _, err := ReadComplex128(r, nil, 1); return err },
	} {
		if err := read(bytes.NewReader(short)); !errors.Is(err, ErrTruncated) {
			t.Errorf("%s: got %v, want ErrTruncated", name, err)
		}
	}
}

// header builds a .npy prefix with the given version and dictionary,
// unpadded.
func header(major, minor byte, dict string) []byte {
	b := append([]byte("\x93NUMPY"), major, minor)
	if major == 1 {
		b = binary.LittleEndian.AppendUint16(b, uint16(len(dict)))
	} else {
		b = binary.LittleEndian.AppendUint32(b, uint32(len(dict)))
	}
	return append(b, dict...)
}

func TestReadHeaderErrors(t *testing.T) {
	t.Parallel()
	ok := "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }"
	dict := func(old, new string) string { return strings.Replace(ok, old, new, 1) }
	for _, c := range []struct {
		name string
		in   []byte
		want string
	}{
		{"empty", nil, "too short for the magic string"},
		{"short", []byte("\x93NUM"), "too short"},
		{"bad magic", []byte("\x93NUMPZ\x01\x00\x00\x00"), "bad magic string"},
		{"text file", []byte("x,y\n1,2\n3,4\n"), "bad magic string"},
		{"version 0.0", header(0, 0, ok), "version 0.0"},
		{"version 4.0", header(4, 0, ok), "version 4.0"},
		{"version 1.1", header(1, 1, ok), "version 1.1"},
		{"version 2.5", header(2, 5, ok), "version 2.5"},
		{"no header length", []byte("\x93NUMPY\x01\x00\x10"), "truncated header"},
		{"no v2 header length", []byte("\x93NUMPY\x02\x00\x10\x00"), "truncated header"},
		{"header cut short", header(1, 0, ok)[:30], "truncated header"},
		{"v2 header too long", append([]byte("\x93NUMPY\x02\x00"), 0, 0, 0, 1), "exceeds"},
		{"not a dictionary", header(1, 0, "descr: <f4"), "not a dictionary"},
		{"missing shape", header(1, 0, "{'descr': '<f4', 'fortran_order': False}"), "needs descr, fortran_order and shape"},
		{"empty dictionary", header(1, 0, "{}"), "needs descr"},
		{"unknown key", header(1, 0, dict("}", "'align': 8, }")), `unknown key "align"`},
		{"duplicate descr", header(1, 0, dict("{", "{'descr': '<f8', ")), "duplicate key 'descr'"},
		{"duplicate shape", header(1, 0, dict(" }", " 'shape': (1,), }")), "duplicate key 'shape'"},
		{"duplicate order", header(1, 0, dict("{", "{'fortran_order': False, ")), "duplicate key 'fortran_order'"},
		{"big-endian", header(1, 0, dict("<f4", ">f4")), "big-endian"},
		{"int dtype", header(1, 0, dict("<f4", "<i4")), "unsupported dtype"},
		{"structured dtype", header(1, 0, dict("'<f4'", "[('a', '<f4')]")), "descr"},
		{"byte-order-free dtype", header(1, 0, dict("<f4", "|u1")), "unsupported dtype"},
		{"fortran order", header(1, 0, dict("False", "True")), "Fortran-ordered"},
		{"fortran order 0", header(1, 0, dict("False", "0")), "True or False"},
		{"shape list", header(1, 0, dict("(2, 3)", "[2, 3]")), "expected '('"},
		{"negative dimension", header(1, 0, dict("(2, 3)", "(2, -3)")), "non-negative integer"},
		{"float dimension", header(1, 0, dict("(2, 3)", "(2, 3.5)")), "expected ',' or ')'"},
		{"unclosed shape", header(1, 0, "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3}"), "shape"},
		{"huge dimension", header(1, 0, dict("(2, 3)", "(99999999999999999999,)")), "out of range"},
		{"overflowing shape", header(1, 0, dict("(2, 3)", "(4000000000, 4000000000, 4000000000)")), "overflows"},
		{"too many dimensions", header(1, 0, dict("(2, 3)", "("+strings.Repeat("1, ", 33)+")")), "too many dimensions"},
		{"unterminated string", header(1, 0, "{'descr: '<f4'}"), "malformed header"},
		{"missing colon", header(1, 0, dict("'descr': ", "'descr' ")), "expected ':'"},
		{"missing comma", header(1, 0, dict("'<f4', ", "'<f4' ")), "expected ','"},
		{"unquoted key", header(1, 0, dict("'descr'", "descr")), "quoted string"},
	} {
		h, err := ReadHeader(bytes.NewReader(c.in))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: got %+v, %v; want an error containing %q", c.name, h, err, c.want)
		}
	}
}

// TestReadHeaderVariants accepts layouts other writers produce.
func TestReadHeaderVariants(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name  string
		in    []byte
		shape []int
	}{
		{"no trailing comma, double quotes", header(1, 0, `{"descr": "<f8", "fortran_order": False, "shape": (5,)}`+"\n"), []int{5}},
		{"keys in another order", header(1, 0, "{'shape': (2, 1), 'fortran_order': False, 'descr': '<c8'}"), []int{2, 1}},
		{"version 3.0", header(3, 0, "{'descr': '<f4', 'fortran_order': False, 'shape': (), }\n"), []int{}},
		{"tabs and newlines", header(1, 0, "{'descr':\t'<f4',\n'fortran_order': False,\n'shape': ( 2 , 3 ) }\x00\x00"), []int{2, 3}},
	} {
		h, err := ReadHeader(bytes.NewReader(c.in))
		if err != nil || !slices.Equal(h.Shape, c.shape) || h.DataOffset != int64(len(c.in)) {
			t.Errorf("%s: got %+v, %v", c.name, h, err)
		}
	}
}

func TestOpenErrors(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var good bytes.Buffer
	WriteFloat64(&good, []int{2, 3}, make([]float64, 6))
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	for _, c := range []struct {
		name string
		path string
		max  int64
		want string
		is   error
	}{
		{"missing", filepath.Join(dir, "nothing.npy"), 0, "", os.ErrNotExist},
		{"directory", dir, 0, "is a directory", nil},
		{"truncated", write("short.npy", good.Bytes()[:good.Len()-1]), 0, "needs 48 data bytes, file has 47", ErrTruncated},
		{"trailing bytes", write("long.npy", append(slices.Clone(good.Bytes()), 0)), 0, "49 data bytes", nil},
		{"memory cap", write("ok.npy", good.Bytes()), 47, "over the memory cap of 47 bytes", nil},
		{"header claims a terabyte", write("tb.npy", header(1, 0, "{'descr': '<f8', 'fortran_order': False, 'shape': (131072, 1048576), }")), 0, "truncated", ErrTruncated},
	} {
		f, _, err := Open(c.path, c.max)
		if err == nil {
			f.Close()
			t.Errorf("%s: opened", c.name)
			continue
		}
		if !strings.Contains(err.Error(), c.want) || (c.is != nil && !errors.Is(err, c.is)) {
			t.Errorf("%s: got %v, want %q / %v", c.name, err, c.want, c.is)
		}
	}
	// At the cap exactly is fine.
	f, _, err := Open(filepath.Join(dir, "ok.npy"), 48)
	if err != nil {
		t.Errorf("at the cap: %v", err)
	} else {
		f.Close()
	}
}

func TestWriteHeaderLayout(t *testing.T) {
	t.Parallel()
	for _, shape := range [][]int{{}, {1}, {3, 64, 1266}, {1 << 20, 1 << 20}, slices.Repeat([]int{2}, 32)} {
		var b bytes.Buffer
		if err := WriteHeader(&b, Float32, shape); err != nil {
			t.Fatal(err)
		}
		if b.Len()%64 != 0 || b.Bytes()[b.Len()-1] != '\n' || b.Bytes()[6] != 1 {
			t.Errorf("%v: header of %d bytes: %q", shape, b.Len(), b.Bytes())
		}
		h, err := ReadHeader(bytes.NewReader(b.Bytes()))
		if err != nil || !slices.Equal(h.Shape, shape) || h.DataOffset != int64(b.Len()) {
			t.Errorf("%v: read back %+v, %v", shape, h, err)
		}
	}
	// A dictionary over 64 KiB needs version 2.0.
	var b bytes.Buffer
	WriteHeader(&b, Float32, slices.Repeat([]int{1}, 30000))
	if b.Bytes()[6] != 2 || b.Len()%64 != 0 {
		t.Errorf("long header: version %d, %d bytes", b.Bytes()[6], b.Len())
	}
}

func TestWriteShapeMismatchPanics(t *testing.T) {
	t.Parallel()
	defer func() {
		r := recover()
		if s, ok := r.(string); !ok || !strings.HasPrefix(s, "npy: shape [2 3] holds 6 elements, slice has 5") {
			t.Errorf("recovered %v", r)
		}
	}()
	WriteFloat32(io.Discard, []int{2, 3}, make([]float32, 5))
}

func TestWriteErrors(t *testing.T) {
	t.Parallel()
	w := failWriter{}
	for name, err := range map[string]error{
		"header":    WriteHeader(w, Float64, []int{1}),
		"float32":   WriteFloat32(w, []int{1}, []float32{1}),
		"float64":   WriteFloat64(w, []int{1}, []float64{1}),
		"complex64": WriteComplex64(w, []int{1}, []complex64{1}),
	} {
		if !errors.Is(err, errFail) {
			t.Errorf("%s: got %v, want the writer's error", name, err)
		}
	}
}

var errFail = errors.New("disk full")

type failWriter struct{}

func (failWriter) Write([]byte) (int, error) { return 0, errFail }

func TestHeaderSizes(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		h           Header
		len, nbytes int64
	}{
		{Header{DType: Float32, Shape: []int{3, 64, 1266}}, 3 * 64 * 1266, 4 * 3 * 64 * 1266},
		{Header{DType: Complex128, Shape: []int{}}, 1, 16},
		{Header{DType: Complex64, Shape: []int{5, 0}}, 0, 0},
		{Header{DType: Float64, Shape: []int{-1}}, -1, -1},
		{Header{DType: Float64, Shape: []int{1 << 40, 1 << 40}}, -1, -1},
		{Header{DType: Complex128, Shape: []int{1 << 30, 1 << 30}}, 1 << 60, -1},
	} {
		if n, b := c.h.Len(), c.h.Bytes(); n != c.len || b != c.nbytes {
			t.Errorf("%v %v: Len %d Bytes %d, want %d %d", c.h.DType, c.h.Shape, n, b, c.len, c.nbytes)
		}
	}
	for _, c := range []struct {
		d    DType
		s    string
		size int
	}{{Float32, "<f4", 4}, {Float64, "<f8", 8}, {Complex64, "<c8", 8}, {Complex128, "<c16", 16}, {0, "invalid", 0}} {
		if c.d.String() != c.s || c.d.Size() != c.size {
			t.Errorf("%d: %q %d", c.d, c.d.String(), c.d.Size())
		}
	}
}
