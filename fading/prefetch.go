package fading

import "unsafe"

// PrefetchState hints the CPU to bring the channel's own fields into its
// caches: for a caller about to fill many channels in turn (each cold in
// cache among thousands), a few channels ahead of the one it fills. A hint
// only: no result depends on it.
func (c *Channel) PrefetchState() {
	prefetchLines(unsafe.Pointer(c), int(unsafe.Sizeof(*c)+63)/64)
}

// PrefetchSamples hints the CPU to bring the internal samples that the
// next FillGains of about n output samples reads (interpolation mode)
// into its caches; it reads the channel's fields, so call it after
// PrefetchState has had time to act. A hint only: no result depends on
// it.
func (c *Channel) PrefetchSamples(n int) {
	if c.hist == 0 || n <= 0 {
		return
	}
	stride := c.hist + c.blk
	first := int(float64(c.m)*c.step) - int(c.blockStart) + c.hist - interpBefore
	first = min(max(first, 0), stride-1)
	count := min(int(float64(n)*c.step)+interpTaps+8, stride-first)
	lines := (count*8+63)/64 + 1
	for l := 0; l < c.nt; l++ {
		prefetchLines(unsafe.Pointer(&c.flatRe[l*stride+first]), lines)
		prefetchLines(unsafe.Pointer(&c.flatIm[l*stride+first]), lines)
	}
}
