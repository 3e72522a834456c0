// Command celerity estimates the speed of sound and near-field aberration
// from ultrasound channel data, re-forms images with corrected delays,
// reports what the correction gained, and simulates acquisitions with known
// ground truth.
package main

import (
	"os"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
