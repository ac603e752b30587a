package num

import (
	"fmt"
	"strconv"
	"strings"
)

// Factors spells the factors of a product as messages write them: "2·3·4".
func Factors(factors ...int) string {
	s := make([]string, len(factors))
	for i, f := range factors {
		s[i] = strconv.Itoa(f)
	}
	return strings.Join(s, "·")
}

// Product names an element count by its formula, its factors and their
// product, "In·Hidden = 3·4 = 12", or, for one factor, by its formula and
// value, "Out = 5".
func Product(formula string, factors ...int) string {
	n := 1
	for _, f := range factors {
		n *= f
	}
	if len(factors) == 1 {
		return fmt.Sprintf("%s = %d", formula, n)
	}
	return fmt.Sprintf("%s = %s = %d", formula, Factors(factors...), n)
}
