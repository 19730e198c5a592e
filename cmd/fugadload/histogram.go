package main

import (
	"math/bits"
	"time"
)

// histogram records durations in log-linear buckets in the manner of
// HdrHistogram (Tene, "HdrHistogram: A High Dynamic Range Histogram",
// hdrhistogram.org): values below 2·2^subBits ns are kept exactly, larger
// ones in buckets whose width is 2^-subBits of their lower bound, so every
// quantile is within 1/128 (0.8 %) of a recorded value, from nanoseconds
// to hours, in a fixed 60 KiB. The zero value is ready to use; merging two
// histograms is exact.
type histogram struct {
	counts   [(65 - subBits) << subBits]uint64
	n        uint64
	sum      uint64
	min, max uint64
}

// subBits sets the relative resolution, 2^-subBits.
const subBits = 7

// bucketOf returns the bucket of v ns. Values v < 2^(subBits+1) have their
// own bucket; above, v = m·2^s with m in [2^subBits, 2^(subBits+1)) goes to
// bucket (s+1)·2^subBits + m − 2^subBits, which continues the exact range
// without a gap.
func bucketOf(v uint64) int {
	if v < 2<<subBits {
		return int(v)
	}
	s := bits.Len64(v) - subBits - 1
	m := v >> s
	return (s+1)<<subBits + int(m) - 1<<subBits
}

// bucketRange returns the smallest value of bucket i and the bucket width.
func bucketRange(i int) (low, width uint64) {
	if i < 2<<subBits {
		return uint64(i), 1
	}
	s := i>>subBits - 1
	m := uint64(i&(1<<subBits-1)) + 1<<subBits
	return m << s, 1 << s
}

// record adds one duration (negative durations count as zero).
func (h *histogram) record(d time.Duration) {
	v := uint64(max(d, 0))
	h.counts[bucketOf(v)]++
	if h.n == 0 || v < h.min {
		h.min = v
	}
	if v > h.max {
		h.max = v
	}
	h.n++
	h.sum += v
}

// merge adds the counts of o.
func (h *histogram) merge(o *histogram) {
	if o.n == 0 {
		return
	}
	for i, c := range o.counts {
		h.counts[i] += c
	}
	if h.n == 0 || o.min < h.min {
		h.min = o.min
	}
	h.max = max(h.max, o.max)
	h.n += o.n
	h.sum += o.sum
}

// count returns the number of recorded values.
func (h *histogram) count() uint64 { return h.n }

// quantile returns the q-quantile (0 ≤ q ≤ 1) as the middle of the bucket
// that holds the value of rank ⌈q·n⌉, clamped to the recorded extremes; 0
// when empty.
func (h *histogram) quantile(q float64) time.Duration {
	if h.n == 0 {
		return 0
	}
	rank := uint64(q*float64(h.n) + 0.999999999)
	rank = min(max(rank, 1), h.n)
	var seen uint64
	for i, c := range h.counts {
		seen += c
		if seen >= rank {
			low, w := bucketRange(i)
			v := low + (w-1)/2
			return time.Duration(min(max(v, h.min), h.max))
		}
	}
	return time.Duration(h.max)
}

// mean returns the mean recorded value; 0 when empty.
func (h *histogram) mean() time.Duration {
	if h.n == 0 {
		return 0
	}
	return time.Duration(h.sum / h.n)
}
