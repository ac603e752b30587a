package attention_test

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/mask"
)

// A prefill over two positions: Q = K = I₂, V = [[1, 2], [3, 4]], head
// dimension 2, so the logits are I₂/√2. The output rows are the worked
// value [mpmath, 40 digits]: (1.6604769013466861, 2.6604769013466861),
// (2.3395230986533139, 3.3395230986533139). With the causal mask the first
// query sees only the first key.
func ExampleForward() {
	s := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 2, Dk: 2, Dv: 2}
	q := []float64{1, 0, 0, 1}
	k := []float64{1, 0, 0, 1}
	v := []float64{1, 2, 3, 4}
	out, lse, err := attention.Forward(q, k, v, s, attention.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("full:   %.16f\n", out)
	fmt.Printf("lse:    %.16f\n", lse)
	out, _, _ = attention.Forward(q, k, v, s, attention.Options{Mask: mask.Causal()})
	fmt.Printf("causal: %.4f\n", out)
	// Output:
	// full:   [1.6604769013466862 2.6604769013466862 2.3395230986533138 3.3395230986533138]
	// lse:    [1.1079403076572498 1.1079403076572498]
	// causal: [1.0000 2.0000 2.3395 3.3395]
}

// One decoding step: the query at position 3 against a cache of 4 keys is
// the last row of the causal prefill. Its logits are 1, 2, 3, 4, so the
// output is Σ_j e^j·10j / Σ_j e^j = 34.926527345857697… [mpmath, 40 digits].
func ExampleDecode() {
	prefill := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 4, Lk: 4, Dk: 1, Dv: 1}
	q := []float64{0.5, -1, 2, 1}
	k := []float64{1, 2, 3, 4}
	v := []float64{10, 20, 30, 40}
	full, _, _ := attention.Forward(q, k, v, prefill, attention.Options{Mask: mask.Causal()})

	step := prefill
	step.Lq = 1
	out, _, err := attention.Decode(q[3:], k, v, step, 3, attention.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("prefill row 3: %.12f\n", full[3])
	fmt.Printf("decode pos 3:  %.12f\n", out[0])
	// Output:
	// prefill row 3: 34.926527345858
	// decode pos 3:  34.926527345858
}

// Grouped-query attention: four query heads read two kv heads. With
// GroupBlocks heads 0, 1 read kv head 0 and heads 2, 3 kv head 1; with
// GroupCycle heads 0, 2 read kv head 0 and heads 1, 3 kv head 1. With one
// key per kv head each output is that head's value.
func ExampleForward_grouped() {
	s := attention.Shape{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 1, Lk: 1, Dk: 1, Dv: 1}
	q := []float64{1, 1, 1, 1}
	k := []float64{1, 1}
	v := []float64{100, 200} // kv head 0, kv head 1
	for _, g := range []attention.GroupMap{attention.GroupBlocks, attention.GroupCycle} {
		out, _, _ := attention.Forward(q, k, v, s, attention.Options{Group: g})
		fmt.Println(g, out)
	}
	// Output:
	// blocks [100 100 200 200]
	// cycle [100 200 100 200]
}

// The gradient of L = Σ dOut·O. With one key the weight is 1 whatever the
// logit, so dQ and dK are 0 and dV = dOut; with two equal keys each weight
// is ½.
func ExampleBackward() {
	s := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 2, Dk: 1, Dv: 1}
	q := []float64{1}
	k := []float64{0.5, 0.5}
	v := []float64{1, 3}
	dOut := []float64{1}
	g, err := attention.Backward(q, k, v, dOut, nil, s, attention.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("dV:", g.DV)
	// dQ = Scale·Σ_j P_j (v_j − O) k_j = 0.5·(½(−1) + ½(1))·0.5 = 0.
	fmt.Println("dQ:", g.DQ)
	// dK_j = P_j (v_j − O) q: ½·(−1), ½·(+1).
	fmt.Println("dK:", g.DK)
	// Output:
	// dV: [0.5 0.5]
	// dQ: [0]
	// dK: [-0.5 0.5]
}

// Two halves of the keys computed apart and merged give the whole. The
// worked value [mpmath, 40 digits]: logits [1, 3, 2] have log-sum-exp
// 3.4076059644443803 and weights [0.0900…, 0.6652…, 0.2447…]; with V = I₃
// the output is the weights.
func ExampleMerge() {
	s := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 3, Dk: 1, Dv: 3}
	q := []float64{1}
	k := []float64{1, 3, 2}
	v := []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}
	o := attention.Options{Scale: 1, BiasBatch: 1, BiasHeads: 1}
	inf := math.Inf(-1)
	o.Bias = []float64{0, 0, inf} // keys 0, 1
	outA, lseA, _ := attention.Forward(q, k, v, s, o)
	o.Bias = []float64{inf, inf, 0} // key 2
	outB, lseB, _ := attention.Forward(q, k, v, s, o)
	out, lse, err := attention.Merge(outA, lseA, outB, lseB, s.Dv)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("lse %.14f\nout %.15f\n", lse[0], out)
	// Output:
	// lse 3.40760596444438
	// out [0.090030573170380 0.665240955774822 0.244728471054798]
}

func ExampleSoftmax() {
	// Logits near 1000 would overflow a naive exp; the row maximum is
	// subtracted first.
	p, _ := attention.Softmax([]float64{1000, 1001, 1002}, 3)
	lse, _ := attention.LogSumExp([]float64{1, 3, 2}, 3)
	fmt.Printf("%.6f\n", p)
	fmt.Println(lse[0])
	// Output:
	// [0.090031 0.244728 0.665241]
	// 3.40760596444438
}
