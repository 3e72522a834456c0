// Package report draws celerity's results: B-mode images (single and side by
// side for before/after comparisons), line plots of sweeps and estimates, and
// histograms for cohort summaries, each written as a PNG to an io.Writer, and
// gathers such figures with the numbers and tables they belong to into one
// self-contained HTML report (HTML).
//
// It computes no metrics: every number it draws or shows is handed to it.
// Image coordinates come in metres (x lateral, z depth, as everywhere in
// celerity) and are shown in millimetres with depth increasing downward and
// equal millimetre scaling on both axes. Image values are in dB with 0 dB at the
// maximum, shown in grayscale from black (-dynamic range) to white (0 dB).
// Sizes are given in centimetres of the printed figure; the resolution is
// DefaultDPI unless an options field says otherwise.
//
// Plots are drawn with gonum.org/v1/plot; the layout (equal-aspect image
// panels, colour bar, legend below the axes) is this package's own.
//
// The HTML report is a single file with its style sheet inline and its
// figures embedded as data URIs: no scripts, fonts or network references,
// so that it opens offline and can be archived as it is. It reads no clock;
// the same Report gives the same bytes.
//
// References:
//   - Sturges HA. The choice of a class interval. J. Am. Stat. Assoc. 21(153),
//     1926 (default number of histogram bins, ceil(log2 n) + 1).
package report
