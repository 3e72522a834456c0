// Package cohort runs celerity's estimators over a collection of
// acquisitions (a cohort: subjects, phantoms, sessions) and gathers the
// results into one table, with summary statistics, plots and an HTML page.
//
// The acquisitions come from folders found under search roots (every folder
// holding acquisition.yaml) or from a CSV manifest with an id column and
// metadata columns (group, temperature, ...). Each acquisition is one job of
// internal/jobs, the runner the benchmark suites use: jobs run in parallel,
// each result is written atomically as its own record as soon as it is
// finished, a failure is a recorded row and the run goes on, an interrupted
// run continues where it stopped, and a cohort can be cut into shards for a
// batch scheduler and merged again. The table holds no runtimes (they are in
// timing.csv and the timing part of cohort.json), so the same acquisitions
// and settings give the same bytes however the run was split or interrupted.
//
// Steps per acquisition: speed (correction.EstimateSpeed, the focus sweep
// with its check for a near-field aberrator; optionally the point-target fit,
// and the speed resolved by depth), aberration (aberration.Estimate at the
// estimated speed) and correct (correction.Run and correction.Evaluate: the
// image before and after correction).
//
// Units: SI inside (m/s, s); table columns carry their unit in their names
// (_mps, _s, _mm).
//
// References: the estimators' own (packages speed, aberration,
// correction); outliers by Tukey's fences, 1.5 interquartile ranges beyond
// the quartiles (Tukey JW, Exploratory Data Analysis, Addison-Wesley, 1977,
// from memory); quartiles by linear interpolation between order statistics
// (Hyndman & Fan, The American Statistician 50(4), 1996, definition 7, from
// memory).
package cohort
