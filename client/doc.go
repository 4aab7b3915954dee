// Package client is the thin Go client of fadeloop: dialling (plain, TLS,
// mutual TLS), typed helpers for every RPC and an embedded in-process server
// for use without a separate fadeloopd.
package client
