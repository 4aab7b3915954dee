// Package jobs runs sweeps (and tuning replications) as durable batch jobs
// over a NATS JetStream work queue, so that no finished point is ever lost
// and the work spreads over any number of worker processes.
//
// A job is identified by a hash of its normalised request (JobID). Its units
// (a sweep grid point; a tune candidate × condition × replication) are
// published as self-contained messages (Unit) to the work-queue stream
// UnitStream, de-duplicated by unit ID (Nats-Msg-Id). Workers (RunWorker,
// the `fadeloopd worker` subcommand and the in-process workers of the
// single-machine mode) pull a unit, run it with the loop engine, store the
// Result in the key-value bucket ResultBucket under "<job>.<index>" and only
// then acknowledge it; long units extend the acknowledgement deadline. A
// worker killed mid-unit leaves the unit to be redelivered; a unit delivered
// MaxAttempts times without success is stored as failed with its last
// error, never retried for ever.
//
// The submitter (Submit, Job.Results) publishes only the units that have no
// stored result, so re-running the same request resumes it, and streams
// every stored result (old and new) as it arrives. Status and Cancel work by
// job ID. StartEmbedded runs a NATS server with an on-disk store inside the
// process for the no-setup single-machine mode.
//
// A unit's result depends only on (normalised scenario, unit index, seed):
// it is bit-identical in one process, over several workers, after a
// redelivery and after a resume (WallTimeS, UserSlotsPerS, Attempts and
// Worker excepted, see Result.Deterministic).
//
// The package imports no gRPC or generated protobuf code.
package jobs
