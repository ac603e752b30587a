package mask_test

import (
	"fmt"
	"strings"

	"github.com/plumbref/plumb/mask"
)

// show prints batch entry 0 of a mask on g as a grid: one line per query,
// '#' where the key is visible and '.' where it is not; or err, the error
// of the constructor that made m, when there is one.
func show(m mask.Mask, err error, g mask.Geometry) {
	if err != nil {
		fmt.Println(err)
		return
	}
	v, err := m.Visible(g)
	if err != nil {
		fmt.Println(err)
		return
	}
	for i := 0; i < g.Lq; i++ {
		var b strings.Builder
		for j := 0; j < g.Lk; j++ {
			if v[i*g.Lk+j] {
				b.WriteByte('#')
			} else {
				b.WriteByte('.')
			}
		}
		fmt.Printf("q%d@%d %s\n", i, g.Pos(i), b.String())
	}
}

func ExampleFull() {
	show(mask.Full(), nil, mask.Geometry{Batch: 1, Lq: 2, Lk: 4})
	// Output:
	// q0@2 ####
	// q1@3 ####
}

func ExampleCausal() {
	show(mask.Causal(), nil, mask.Geometry{Batch: 1, Lq: 4, Lk: 4})
	// Output:
	// q0@0 #...
	// q1@1 ##..
	// q2@2 ###.
	// q3@3 ####
}

// Two new tokens decoded against a cache of six keys: with AlignEnd (the
// zero value) the last query sits at the last key.
func ExampleGeometry() {
	g := mask.Geometry{Batch: 1, Lq: 2, Lk: 6}
	show(mask.Causal(), nil, g)
	fmt.Println("--- AlignStart, Offset 1")
	g.Align, g.Offset = mask.AlignStart, 1
	show(mask.Causal(), nil, g)
	// Output:
	// q0@4 #####.
	// q1@5 ######
	// --- AlignStart, Offset 1
	// q0@1 ##....
	// q1@2 ###...
}

func ExampleBand() {
	m, err := mask.Band(1, 2) // one key before the query, two after
	show(m, err, mask.Geometry{Batch: 1, Lq: 5, Lk: 5})
	// Output:
	// q0@0 ###..
	// q1@1 ####.
	// q2@2 .####
	// q3@3 ..###
	// q4@4 ...##
}

// Window(3) is three keys ending at the query itself: query 5 sees keys 3,
// 4 and 5.
func ExampleWindow() {
	m, err := mask.Window(3)
	show(m, err, mask.Geometry{Batch: 1, Lq: 6, Lk: 6})
	_, err = mask.Window(-2)
	fmt.Println(err)
	// Output:
	// q0@0 #.....
	// q1@1 ##....
	// q2@2 ###...
	// q3@3 .###..
	// q4@4 ..###.
	// q5@5 ...###
	// mask: invalid window: Window: n = -2; want ≥ 1: a window holds at least the query's own key
}

func ExamplePrefix() {
	m, err := mask.Prefix(3)
	show(m, err, mask.Geometry{Batch: 1, Lq: 5, Lk: 5})
	// Output:
	// q0@0 ###..
	// q1@1 ###..
	// q2@2 ###..
	// q3@3 ####.
	// q4@4 #####
}

func ExampleKeyPadding() {
	m, err := mask.KeyPadding([]int{3, 1}) // batch entry 0 has 3 real keys, entry 1 has 1
	if err != nil {
		fmt.Println(err)
		return
	}
	g := mask.Geometry{Batch: 2, Lq: 1, Lk: 4}
	v, _ := m.Visible(g)
	fmt.Println(v)
	// Output:
	// [true true true false true false false false]
}

func ExamplePacked() {
	// Three sequences of lengths 2, 3 and 1 packed into one row of 6.
	m, err := mask.Packed([]int{0, 2, 5, 6}, mask.BlockCausal)
	show(m, err, mask.Geometry{Batch: 1, Lq: 6, Lk: 6})
	_, err = mask.Packed([]int{0, 4, 2}, mask.BlockFull)
	fmt.Println(err)
	// Output:
	// q0@0 #.....
	// q1@1 ##....
	// q2@2 ..#...
	// q3@3 ..##..
	// q4@4 ..###.
	// q5@5 .....#
	// mask: invalid sequence offsets: Packed: offsets[2] = 2; want > offsets[1] = 4: offsets increase strictly
}

func ExampleIntersect() {
	w, _ := mask.Window(2)
	pad, _ := mask.KeyPadding([]int{3})
	m, err := mask.Intersect(w, pad)
	fmt.Println(m)
	show(m, err, mask.Geometry{Batch: 1, Lq: 5, Lk: 5})
	// Output:
	// Intersect(Window(2), KeyPadding([3]))
	// q0@0 #....
	// q1@1 ##...
	// q2@2 .##..
	// q3@3 ..#..
	// q4@4 .....
}

func ExampleMask_BiasFill() {
	g := mask.Geometry{Batch: 1, Lq: 2, Lk: 2}
	b, _ := mask.Causal().Bias(g)
	fmt.Println(b)
	b, _ = mask.Causal().BiasFill(g, -1e9)
	fmt.Println(b)
	// Output:
	// [0 -Inf 0 0]
	// [0 -1e+09 0 0]
}

func ExampleMask_EmptyRows() {
	// Queries look only at themselves and later keys, and only the first two
	// keys are real: queries 2 and 3 see nothing.
	ahead, _ := mask.Band(0, mask.Unbounded)
	pad, _ := mask.KeyPadding([]int{2})
	m, _ := mask.Intersect(ahead, pad)
	rows, _ := m.EmptyRows(mask.Geometry{Batch: 1, Lq: 4, Lk: 4})
	fmt.Println(rows)
	// Output:
	// [{0 2} {0 3}]
}
