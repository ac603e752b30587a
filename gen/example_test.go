package gen_test

import (
	"fmt"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/gen"
)

// The first values plumb help gen states, and the same values as a float32
// kernel takes them (plumb gen -dtype float32).
func ExampleNormal() {
	z, err := gen.Normal(1, 3, 0, 1) // plumb gen -shape 3 -seed 1
	if err != nil {
		panic(err)
	}
	fmt.Println(z)
	fmt.Println(compare.Narrow(z))
	// Output:
	// [0.8588583889475008 0.5383481862322732 0.8094635935566922]
	// [0.8588584 0.5383482 0.8094636]
}

func ExampleUniform() {
	u, err := gen.Uniform(1, 3, 0, 1) // plumb gen -shape 3 -seed 1 -dist uniform -low 0 -high 1
	if err != nil {
		panic(err)
	}
	fmt.Println(u)
	// Output: [0.5982609488236689 0.08911177802144832 0.715356444878812]
}
