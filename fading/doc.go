// Package fading holds fadeloop's channel models: mobility and Doppler
// (f_D = v·f_c/c), the Clarke (Jakes) Doppler spectrum, Rayleigh and Rician
// fading generators (a statistically correct sum of sinusoids after Zheng &
// Xiao 2003, and a spectral inverse-FFT generator after Young & Beaulieu
// 2000), tap-delay profiles with ideal maximal-ratio (RAKE) combining,
// log-normal shadowing correlated in distance (Gudmundson 1991), and path-loss
// models (free space, log-distance, Hata, COST-231 Hata).
//
// Every random draw comes from a stream derived from (seed, user, index,
// process kind) by NewStream; nothing uses a global source, so samples are
// bit-identical for identical inputs whatever GOMAXPROCS is.
//
// The package is pure Go: it imports only the standard library and gonum,
// never grpc or generated protobuf code.
package fading
