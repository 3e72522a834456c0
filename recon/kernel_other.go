//go:build !amd64 || purego

package recon

// haveVector is false: there is no vector kernel for this architecture.
var haveVector = false

func linearVector(acc, row *complex64, tx, rx *float32, w *complex64, n int, lim float32) {
	panic("recon: no vector kernel on this architecture")
}
