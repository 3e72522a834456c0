// Package bench scores speed-of-sound and aberration estimators, built-in
// or external programs, against ground truth on suites of simulated cases.
//
// A suite file (format celerity.suite/1, docs/bench.md) holds a base
// scenario (the simulator's scenario schema, docs/scenario.md), a grid of
// variations of its fields and a list of seeds. Each case, a grid point with
// one seed, has a canonical definition whose SHA-256 names its cache folder,
// so a case is simulated once. The acquisition and the truth are kept in
// separate folders: an estimator is given the acquisition folder alone.
//
// Every estimator runs on every case it applies to; its speed estimate is
// scored against the true speed (bias, rms error, 95th-percentile absolute
// error, interval coverage), its arrival-time error profile against the
// true screen (rms error as a fraction of the true rms, correlation; mean
// and linear trend removed from both), and the image it corrects against
// the uncorrected and the ideal image (share of the lateral width and gCNR
// lost to the errors that the correction recovers). Failures are counted.
// The cases run as jobs of internal/jobs: in parallel, resumable, in
// deterministic shards that MergeInputs combines.
//
// Units: SI inside (m/s, s); results and summaries carry their unit in
// their names (_mps, _ns, _mm).
//
// References: the estimators' own (see packages speed and aberration);
// gCNR: Rodriguez-Molares et al., IEEE TUFFC 67(4), 2020; nearest-rank
// percentile: the definition in common use (e.g. NIST Engineering
// Statistics Handbook, from memory).
package bench
