package cluster

// Radix sort of the sweep keys: least significant digit first, stable, so voxels of equal
// value stay in increasing index order. Digits on which all keys agree are skipped.
const (
	radixBits    = 11
	radixBuckets = 1 << radixBits
	radixDigits  = (64 + radixBits - 1) / radixBits
)

// sortNodes sorts ws.keys ascending (values descending). Packed keys are sorted on their upper
// 32 bits (three digits, the index rides in the lower half); otherwise on all 64 bits, carrying
// ws.order along.
func (ws *TFCEWorkspace) sortNodes(packed bool) {
	n := len(ws.keys)
	if n < 2 {
		return
	}
	first, digits := 0, radixDigits
	if packed {
		first, digits = 32, 3
	}
	src, dst := ws.keys[:n], ws.keys2[:n]
	gsrc, gdst := ws.order[:n], ws.order2[:n]
	h := &ws.hist
	*h = [radixDigits][radixBuckets]int32{}
	for _, k := range src {
		k >>= first
		for d := range digits {
			h[d][(k>>(d*radixBits))&(radixBuckets-1)]++
		}
	}
	for d := range digits {
		c := &h[d]
		shift := uint(first + d*radixBits)
		if c[(src[0]>>shift)&(radixBuckets-1)] == int32(n) {
			continue // every key has this digit
		}
		sum := int32(0)
		for b := range c {
			sum, c[b] = sum+c[b], sum
		}
		if packed {
			for _, k := range src {
				b := (k >> shift) & (radixBuckets - 1)
				dst[c[b]] = k
				c[b]++
			}
		} else {
			for i, k := range src {
				b := (k >> shift) & (radixBuckets - 1)
				p := c[b]
				c[b] = p + 1
				dst[p] = k
				gdst[p] = gsrc[i]
			}
			gsrc, gdst = gdst, gsrc
		}
		src, dst = dst, src
	}
	ws.keys, ws.keys2 = src, dst
	ws.order, ws.order2 = gsrc, gdst
}
