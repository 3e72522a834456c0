//go:build !amd64 || purego

package sim

// haveVector is false: there is no vector deposit for this architecture.
var haveVector = false

func depositVector(row *complex64, gT *float32, gA *complex64, n int, base float32, pj complex64) {
	panic("sim: no vector deposit on this architecture")
}
