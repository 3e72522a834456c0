// Package dsp holds the small numerical building blocks that the beamformer's
// hot loops and the speed-of-sound and aberration estimators share: analytic
// signals, receive-apodization windows, fractional-sample interpolation,
// sub-sample peak refinement, cross-correlation delay estimates and log
// compression.
//
// Units: the package works in samples, not seconds. Signal positions, delays
// and lags are in samples (fractions allowed) of the data's own sampling
// interval; angular frequencies are in radians per sample (omega = 2 pi f / fs);
// window arguments are normalized aperture coordinates in [-1, 1]; levels are
// in dB. Callers convert to SI at the boundary (delay_s = lag / fs).
//
// Conventions: a positive lag means the second signal b is a delayed copy of
// the first signal a, b[n] = a[n - lag], so it arrives lag samples later.
//
// Plans such as [Hilbert] hold scratch buffers and are not safe for concurrent
// use; make one per worker. The per-sample functions ([Linear], [Cubic]) do not
// allocate.
//
// References (from memory; check the originals before quoting numbers):
//   - S. L. Marple, "Computing the discrete-time analytic signal via FFT",
//     IEEE Transactions on Signal Processing 47(9), 1999: the analytic signal
//     by zeroing negative frequencies, doubling positive ones and keeping DC and
//     Nyquist once.
//   - R. G. Keys, "Cubic convolution interpolation for digital image
//     processing", IEEE Transactions on Acoustics, Speech, and Signal Processing
//     29(6), 1981: the cubic kernel with a = -1/2 and its boundary conditions.
//   - F. J. Harris, "On the use of windows for harmonic analysis with the
//     discrete Fourier transform", Proceedings of the IEEE 66(1), 1978: Hann
//     and Tukey (cosine-tapered) windows.
//   - S. W. Flax and M. O'Donnell, "Phase-aberration correction using signals
//     from point reflectors and diffuse scatterers: basic principles", IEEE
//     Transactions on Ultrasonics, Ferroelectrics, and Frequency Control 35(6),
//     1988: nearest-neighbour cross-correlation arrival-time differences.
//   - I. Céspedes, Y. Huang, J. Ophir and S. Spratt, "Methods for estimation of
//     subsample time delays of digitized echo signals", Ultrasonic Imaging
//     17(2), 1995: parabolic peak interpolation of the correlation and its bias.
//   - C. Kasai, K. Namekawa, A. Koyano and R. Omoto, "Real-time two-dimensional
//     blood flow imaging using an autocorrelation technique", IEEE Transactions
//     on Sonics and Ultrasonics 32(3), 1985: delay (phase shift) from the
//     phase of a complex zero-lag correlation.
//   - P. N. Swarztrauber, "Vectorizing the FFTs", in Parallel Computations,
//     Academic Press, 1982 (FFTPACK, used through gonum's dsp/fourier): mixed
//     radix 2, 3, 4, 5 transforms, hence the 5-smooth padded lengths.
package dsp
