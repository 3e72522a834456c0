package npy

import (
	"bytes"
	"slices"
	"testing"
)

// FuzzNpyHeader feeds arbitrary bytes to ReadHeader. It must never panic; a
// header it accepts must describe a supported C-order array whose size does
// not overflow, leave the reader exactly at DataOffset, and survive a
// rewrite by WriteHeader. The seed corpus in testdata/fuzz/FuzzNpyHeader
// holds the NumPy files of testdata and near-valid headers. Run with
//
//	go test ./internal/npy -run '^$' -fuzz FuzzNpyHeader -fuzztime 60s
func FuzzNpyHeader(f *testing.F) {
	var b bytes.Buffer
	WriteFloat32(&b, []int{2, 3}, make([]float32, 6))
	f.Add(b.Bytes())
	f.Fuzz(func(t *testing.T, in []byte) {
		r := bytes.NewReader(in)
		h, err := ReadHeader(r)
		if err != nil {
			return
		}
		if h.DType.Size() == 0 {
			t.Fatalf("accepted dtype %v", h.DType)
		}
		if h.Len() < 0 || h.Bytes() < 0 {
			t.Fatalf("accepted shape %v that overflows", h.Shape)
		}
		if read := int64(len(in) - r.Len()); read != h.DataOffset {
			t.Fatalf("DataOffset %d, but the header used %d bytes", h.DataOffset, read)
		}
		// The data that follow, if complete, decode without error.
		if n := h.Bytes(); n <= int64(r.Len()) {
			var err error
			switch h.DType {
			case Float32:
				_, err = ReadFloat32(r, nil, int(h.Len()))
			case Float64:
				_, err = ReadFloat64(r, nil, int(h.Len()))
			case Complex64:
				_, err = ReadComplex64(r, nil, int(h.Len()))
			case Complex128:
				_, err = ReadComplex128(r, nil, int(h.Len()))
			}
			if err != nil {
				t.Fatalf("reading %d complete data bytes: %v", n, err)
			}
		}
		// Our own header for the same array reads back the same.
		var w bytes.Buffer
		if err := WriteHeader(&w, h.DType, h.Shape); err != nil {
			t.Fatal(err)
		}
		h2, err := ReadHeader(&w)
		if err != nil {
			t.Fatalf("rewritten header: %v", err)
		}
		if h2.DType != h.DType || !slices.Equal(h2.Shape, h.Shape) || h2.DataOffset%64 != 0 {
			t.Fatalf("rewritten header %+v, want %v %v", h2, h.DType, h.Shape)
		}
	})
}
