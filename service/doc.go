// Package service serves fadeloop over gRPC: it converts between the
// fadeloop.v1 protobuf messages and the domain types of packages fading and
// loop, validates requests, bounds their cost, maps errors to status codes,
// and wires the server (health, reflection, interceptors, metrics).
//
// No request can tie up the server: every call's deadline is capped, a
// stream whose client stops reading or sending is cut after an idle
// timeout (releasing its run slot or Lockstep place), Lockstep streams are
// shared per client, health Watch streams and streams per connection are
// bounded, and undecodable input is INVALID_ARGUMENT. The daemon flag set
// (DaemonFlags, with FADELOOPD_* environment variables) is shared by
// fadeloopd and `fadeloop serve`.
//
// It is the only package that speaks gRPC status codes.
package service
