package fading

import "testing"

// TestSplitMix64Reference checks SplitMix64 against the first outputs of
// the reference generator splitmix64.c (Vigna, prng.di.unimi.it) started
// at state 0 (memory): 0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4,
// 0x06C45D188009454F. The stream hash is the first output from its state.
func TestSplitMix64Reference(t *testing.T) {
	for n, want := range []uint64{0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F} {
		if got := SplitMix64(0, uint64(n)); got != want {
			t.Errorf("SplitMix64(0, %d) = %#x, want %#x", n, got, want)
		}
	}
	if splitmix64(0) != 0xE220A8397B1DCDAF {
		t.Error("the stream hash is not SplitMix64's first output")
	}
}
