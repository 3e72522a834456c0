package dsp

import "math/rand/v2"

// newRand returns the package tests' seeded generator.
func newRand() *rand.Rand { return rand.New(rand.NewPCG(1, 2)) }

// panics reports whether f panics.
func panics(f func()) (did bool) {
	defer func() { did = recover() != nil }()
	f()
	return false
}
