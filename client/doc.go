// Package client is the thin Go client of fadeloop: dialling (plain, TLS,
// mutual TLS), typed helpers for every RPC and an embedded in-process server
// for use without a separate fadeloopd.
//
// Connect to a server, or start one inside the process:
//
//	c, err := client.Dial("fadeloop.example.internal:8470", client.Options{
//		TLS:         client.TLSOptions{CAFile: "ca.pem"},
//		CallTimeout: 10 * time.Minute,
//	})
//	c, err := client.Embedded(service.Config{}, client.Options{})
//
// Every call then goes through the same typed helpers:
//
//   - Simulate runs one scenario, passing progress events to a callback,
//     and returns the RunReport;
//   - Sweep returns a SweepCall whose Points method yields the grid points
//     as they finish (an iter.Seq2), then Summary;
//   - StreamGains yields chunks of complex tap gains, decoded (DecodeGains);
//   - CheckChannel runs the channel self-check;
//   - Lockstep opens a LockstepSession for co-simulation: StepSlot per slot
//     (SIR, block results, inactive users, joins, leaves; Step for SIR and
//     blocks only), Close at the end;
//   - Health asks grpc.health.v1.
//
// Errors keep what the server said: an INVALID_ARGUMENT answer is an
// *InvalidInputError listing every field violation ("field: rule"),
// IsUnreachable tells an UNAVAILABLE server, IsCanceled a cancelled call;
// other errors are gRPC statuses.
//
// Dial uses ServiceConfig unless told not to: round_robin load balancing
// over every address a name resolves to (e.g. a dns:/// name of a headless
// service), and retries on UNAVAILABLE for the idempotent calls (every
// result is a pure function of its request).
//
// Scenario files (the protojson form of fadeloop.v1.Scenario, in JSON or
// YAML) are read by LoadScenarioFile and ParseScenario, which reject
// unknown fields by name and keep each field's line, so that the server's
// field violations can be reported at their line (ScenarioFile.Locate).
package client
