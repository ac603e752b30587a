package stack_test

import (
	"fmt"

	"github.com/plumbref/plumb/stack"
)

// Greedy steps on the shipped demo model (2 layers of width 64, 4 query
// heads on 2 kv heads, a vocabulary of 100), its weights read one layer at
// a time from the .npz archive the manifest names.
func ExampleGreedy() {
	m, err := stack.ReadManifest("testdata/demo/manifest.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	c, _ := m.Config()
	src, err := stack.NewFiles[float64](m)
	if err != nil {
		fmt.Println(err)
		return
	}
	g, err := stack.Greedy([]int{3, 14, 15, 92}, 4, c, src)
	if err != nil {
		fmt.Println(err)
		return
	}
	n, _ := stack.CacheBytes(c, 4+3, 8)
	fmt.Println("tokens:", g.Tokens)
	fmt.Println("cache bytes:", n)
	// The tokens are the demo model's own (invented weights echo the last
	// prompt token); the cache is 2·2·2·16·7·8 bytes (CacheBytes' formula).
	// Output:
	// tokens: [92 92 92 92]
	// cache bytes: 7168
}
