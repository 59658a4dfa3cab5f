package h5

// fletcher32 is the checksum of HDF5's Fletcher-32 filter
// (H5_checksum_fletcher32): 16-bit big-endian words summed modulo 65535 in
// blocks of 360 words, a trailing odd byte as the high byte of a last word.
// Its correctness is checked by reading directly written chunks back through
// the HDF5 library's own filter, which verifies it.
func fletcher32(data []byte) uint32 {
	var sum1, sum2 uint32
	n := len(data) / 2
	i := 0
	for n > 0 {
		t := min(n, 360)
		n -= t
		for ; t > 0; t-- {
			sum1 += uint32(data[i])<<8 | uint32(data[i+1])
			sum2 += sum1
			i += 2
		}
		sum1 = (sum1 & 0xffff) + (sum1 >> 16)
		sum2 = (sum2 & 0xffff) + (sum2 >> 16)
	}
	if len(data)%2 == 1 {
		sum1 += uint32(data[len(data)-1]) << 8
		sum2 += sum1
		sum1 = (sum1 & 0xffff) + (sum1 >> 16)
		sum2 = (sum2 & 0xffff) + (sum2 >> 16)
	}
	sum1 = (sum1 & 0xffff) + (sum1 >> 16)
	sum2 = (sum2 & 0xffff) + (sum2 >> 16)
	return sum2<<16 | sum1
}

// shuffle regroups bytes as HDF5's shuffle filter does: all first bytes of
// each element, then all second bytes, and so on; trailing bytes that do
// not fill an element are copied as they are.
func shuffle(dst, src []byte, size int) {
	n := len(src) / size
	for j := 0; j < size; j++ {
		out := dst[j*n : (j+1)*n]
		for i := range out {
			out[i] = src[i*size+j]
		}
	}
	copy(dst[n*size:], src[n*size:])
}

// unshuffle undoes shuffle.
func unshuffle(dst, src []byte, size int) {
	n := len(src) / size
	for j := 0; j < size; j++ {
		in := src[j*n : (j+1)*n]
		for i, b := range in {
			dst[i*size+j] = b
		}
	}
	copy(dst[n*size:], src[n*size:])
}
