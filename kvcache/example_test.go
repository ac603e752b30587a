package kvcache_test

import (
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/kvcache"
)

// A pool of 3 pages of 2 positions, one head of dimension 1, holding in
// page p slot t the key 10p + t. A sequence of 3 positions with the page
// table [2, 0] has positions 0 and 1 in page 2 and position 2 in slot 0
// of page 0 (the last page partly filled), so its keys are 20, 21, 0;
// the values are the keys plus 100.
func ExampleGather() {
	p := kvcache.Pool{Pages: 3, PageSize: 2, HeadsKV: 1, Dk: 1, Dv: 1}
	kPool := []float64{0, 1, 10, 11, 20, 21}
	vPool := []float64{100, 101, 110, 111, 120, 121}
	k, v, err := kvcache.Gather(kPool, vPool, p, []int{2, 0}, 3, attention.HeadsMajor)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(k, v)
	_, _, err = kvcache.Gather(kPool, vPool, p, []int{2, 3}, 3, attention.HeadsMajor)
	fmt.Println(err)
	// Output:
	// [20 21 0] [120 121 100]
	// kvcache: invalid page index: Gather: table[1] = 3; want 0 ≤ page < Pool.Pages = 3
}

// A ring of 4 slots after 6 tokens: positions 4 and 5 overwrote 0 and 1
// in slots 0 and 1; slots 2 and 3 still hold positions 2 and 3. After 2
// tokens the last two slots are not yet written.
func ExampleRingPositions() {
	pos, _ := kvcache.RingPositions(6, 4)
	fmt.Println(pos)
	pos, _ = kvcache.RingPositions(2, 4)
	fmt.Println(pos)
	// Output:
	// [4 5 2 3]
	// [0 1 -1 -1]
}

// 32 layers of 8 kv heads of dimension 128 in 2-byte elements take
// 2·32·8·128·2 = 131072 bytes a position; 1000 positions take 131072000
// bytes, and in pages of 16 they fill ⌈1000/16⌉ = 63 pages of 1008
// positions, 132120576 bytes.
func ExampleCacheSize() {
	f, err := kvcache.CacheSize(32, 8, 128, 1000, 2, 16)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%+v\n", f)
	// Output:
	// {Bytes:131072000 Pages:63 PageBytes:132120576}
}

// One decoding step split over the keys [0, 2) and [2, 4) of a cache of
// 4: the query at position 3 with logits 1, 2, 3, 4 (q = 1, k = 1 … 4,
// Scale 1) and values 10, 20, 30, 40. The merge is the whole decode,
// Σ_j e^j·10j / Σ_j e^j = 34.926527345858 (the worked value of the
// attention package's ExampleDecode); the first split alone is
// (e·10 + e²·20)/(e + e²) = 17.310585786300 and lse log(e + e²) =
// 2.313261687518 [mpmath, 40 digits, rounded].
func ExampleMergeSplits() {
	s := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 4, Dk: 1, Dv: 1}
	q, k, v := []float64{1}, []float64{1, 2, 3, 4}, []float64{10, 20, 30, 40}
	o := attention.Options{Scale: 1}
	a, la, _ := kvcache.AttendSplit(q, k, v, s, 3, 0, 2, o)
	b, lb, _ := kvcache.AttendSplit(q, k, v, s, 3, 2, 4, o)
	out, _, err := kvcache.MergeSplits([][]float64{a, b}, [][]float64{la, lb}, 1, attention.EmptyRowZero)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("first split: %.12f, lse %.12f\n", a[0], la[0])
	fmt.Printf("merged:      %.12f\n", out[0])
	// Output:
	// first split: 17.310585786300, lse 2.313261687518
	// merged:      34.926527345858
}

// A ring of 2 slots, one head of dimension 1, fed the keys 1, 2, 3, 4 and
// values 10, 20, 30, 40 at positions 0 … 3. After 4 tokens it holds
// positions 2 and 3, so the query at position 3 (q = 1, Scale 1) sees the
// logits 3 and 4: (e³·30 + e⁴·40)/(e³ + e⁴) = 37.310585786300 [mpmath, 40
// digits, rounded], as attention.Decode with mask.Window(2) over all four
// positions gives.
func ExampleAttendRing() {
	s := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 2, Dk: 1, Dv: 1}
	kRing, vRing := make([]float64, 2), make([]float64, 2)
	for pos, key := range []float64{1, 2, 3, 4} {
		if err := kvcache.RingWrite(kRing, vRing, []float64{key}, []float64{10 * key}, s, pos, attention.HeadsMajor); err != nil {
			fmt.Println(err)
			return
		}
	}
	out, _, err := kvcache.AttendRing([]float64{1}, kRing, vRing, s, 4, attention.Options{Scale: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(kRing, vRing)
	fmt.Printf("%.12f\n", out[0])
	// Output:
	// [3 4] [30 40]
	// 37.310585786300
}
