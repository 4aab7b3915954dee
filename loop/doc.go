// Package loop is fadeloop's uplink power-control engine: the scenario
// model (receiver, user groups, inner and outer loop, link abstraction, run
// settings) with validation, the multi-user slot-by-slot simulation over the
// channels of package fading, and the figures an engineer tunes by (SIR
// error, outage, achieved BLER, transmit power, noise rise, convergence),
// each with a confidence interval.
//
// The package is pure Go: it imports the standard library, gonum and
// package fading, never grpc or generated protobuf code.
package loop
