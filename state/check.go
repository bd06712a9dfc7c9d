package state

import "encoding/binary"

// The check hash is a second 64-bit hash of the key text, independent of
// FNV-1a, so that the pair (Hash, Check) can stand for the text on the
// ingest path: comparing the text itself would cost a cache miss on the
// stored key for every point.
//
// It reads the text a word at a time: each word is xored in and the state
// multiplied by an odd constant and folded with a shift, a bijection of the
// state, so texts of one length that differ in a single word never share a
// check. The length enters at the start, which tells a short last word from
// one padded with zeros, and MurmurHash3's 64-bit finalizer (fmix64)
// spreads every bit over the result.
const (
	checkSeed = 0x243f6a8885a308d3 // digits of pi: any odd constant with mixed bits does
	checkMul  = 0x9fb21c651e98df25 // odd, with mixed bits
	fmixMul1  = 0xff51afd7ed558ccd // fmix64 constants
	fmixMul2  = 0xc4ceb9fe1a85ec53
)

// hashes returns Hash(b) and the check hash of b, computed in one pass:
// the check's chain of multiplications runs beside FNV-1a's and costs
// almost nothing on top of it.
func hashes(b []byte) (h, c uint64) {
	h = fnvOffset
	c = checkSeed ^ uint64(len(b))*checkMul
	for len(b) >= 8 {
		w := binary.LittleEndian.Uint64(b)
		h = (h ^ w&0xff) * fnvPrime
		h = (h ^ w>>8&0xff) * fnvPrime
		h = (h ^ w>>16&0xff) * fnvPrime
		h = (h ^ w>>24&0xff) * fnvPrime
		h = (h ^ w>>32&0xff) * fnvPrime
		h = (h ^ w>>40&0xff) * fnvPrime
		h = (h ^ w>>48&0xff) * fnvPrime
		h = (h ^ w>>56) * fnvPrime
		c = checkWord(c, w)
		b = b[8:]
	}
	var w uint64
	for i, x := range b {
		h = (h ^ uint64(x)) * fnvPrime
		w |= uint64(x) << (8 * i)
	}
	return h, fmix(checkWord(c, w))
}

// checkHash is the check hash of b alone, for keys built without MakeKey;
// it equals the second result of hashes.
func checkHash(b []byte) uint64 {
	c := checkSeed ^ uint64(len(b))*checkMul
	for len(b) >= 8 {
		c = checkWord(c, binary.LittleEndian.Uint64(b))
		b = b[8:]
	}
	var w uint64
	for i, x := range b {
		w |= uint64(x) << (8 * i)
	}
	return fmix(checkWord(c, w))
}

func checkWord(c, w uint64) uint64 {
	c = (c ^ w) * checkMul
	return c ^ c>>29
}

// fmix is MurmurHash3's 64-bit finalizer.
func fmix(x uint64) uint64 {
	x ^= x >> 33
	x *= fmixMul1
	x ^= x >> 33
	x *= fmixMul2
	return x ^ x>>33
}
