// Package jobs runs a list of independent jobs with stable string IDs on a
// pool of workers, and keeps the result of each finished job in its own file,
// so that a run can be interrupted and continued, sliced into deterministic
// shards for a batch scheduler, and merged again. It is meant as the one
// runner of the benchmark suites (package bench) and of cohort runs.
//
// A run works like this:
//
//   - The IDs are sorted (byte order); that is the canonical order. Shard I of
//     N (I from 1 to N) holds the jobs whose index k in the canonical order
//     satisfies k mod N = I - 1. The shards are disjoint and together hold
//     every job, whatever the order the jobs were listed in.
//   - Each finished job is written as a JSON record (see Record) to its own
//     file in the results folder, atomically (temporary file, then rename).
//     A rerun reads the records it finds and skips the jobs they finish, so
//     an interrupted run loses at most the jobs that were in progress.
//   - A job that returns an error or panics is recorded as failed with its
//     message; the run goes on. A failure is a finished job: a rerun skips
//     it unless Config.RetryFailed is set.
//   - A record whose Key differs from its job's Key was made from another
//     definition of that job (another estimator set, another program); it is
//     stale and the job runs again.
//
// Units: durations in seconds in records, time.Duration in Progress.
//
// References: none; this is plumbing.
package jobs
