// Package service serves fadeloop over gRPC: it converts between the
// fadeloop.v1 protobuf messages and the domain types of packages fading and
// loop, validates requests, bounds their cost, maps errors to status codes,
// and wires the server (health, reflection, interceptors, metrics).
//
// It is the only package that speaks gRPC status codes.
package service
