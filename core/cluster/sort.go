package cluster

// Radix sort of the sweep keys: least significant digit first, stable, so voxels of equal
// value stay in increasing index order. Digits on which all keys agree are skipped.
const (
	radixBits    = 11
	radixBuckets = 1 << radixBits
	radixDigits  = (64 + radixBits - 1) / radixBits
)

// sortNodes sorts ws.keys ascending (values descending). Packed keys are sorted on their upper
// 32 bits (three digits, whose histograms gather counted; the index rides in the lower half);
// otherwise on all 64 bits, carrying ws.order along.
func (ws *TFCEWorkspace) sortNodes(packed bool) {
	n := len(ws.keys)
	if n < 2 {
		return
	}
	src, dst := ws.keys[:n], ws.keys2[:n]
	h := &ws.hist
	if packed {
		for d := range 3 {
			c := &h[d]
			shift := uint(32 + d*radixBits)
			if c[(src[0]>>shift)&(radixBuckets-1)] == int32(n) {
				continue // every key has this digit
			}
			prefixSums(c)
			for _, k := range src {
				b := (k >> shift) & (radixBuckets - 1)
				p := c[b]
				c[b] = p + 1
				dst[p] = k
			}
			src, dst = dst, src
		}
		ws.keys, ws.keys2 = src, dst
		return
	}
	gsrc, gdst := ws.order[:n], ws.order2[:n]
	*h = [radixDigits][radixBuckets]int32{}
	for _, k := range src {
		for d := range radixDigits {
			h[d][(k>>(d*radixBits))&(radixBuckets-1)]++
		}
	}
	for d := range radixDigits {
		c := &h[d]
		shift := uint(d * radixBits)
		if c[(src[0]>>shift)&(radixBuckets-1)] == int32(n) {
			continue // every key has this digit
		}
		prefixSums(c)
		for i, k := range src {
			b := (k >> shift) & (radixBuckets - 1)
			p := c[b]
			c[b] = p + 1
			dst[p] = k
			gdst[p] = gsrc[i]
		}
		gsrc, gdst = gdst, gsrc
		src, dst = dst, src
	}
	ws.keys, ws.keys2 = src, dst
	ws.order, ws.order2 = gsrc, gdst
}

// prefixSums turns bucket counts into starting positions.
func prefixSums(c *[radixBuckets]int32) {
	sum := int32(0)
	for b, x := range c {
		c[b] = sum
		sum += x
	}
}
