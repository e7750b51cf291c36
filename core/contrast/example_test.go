package contrast_test

import (
	"fmt"

	"gonum.org/v1/gonum/mat"

	"winnow/core/contrast"
)

func ExampleParse() {
	columns := []string{"naming", "scrambled", "rest-fix", "intercept"}
	c, err := contrast.Parse("naming-scrambled=naming - scrambled", columns)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(c.Name, c.Weights, c.IsF())

	// Names may hold '-': the longest known name wins.
	c, _ = contrast.Parse("avg=0.5*naming + 0.5*scrambled - rest-fix", columns)
	fmt.Println(c.Weights)

	// Comma-separated sums make an F contrast.
	c, _ = contrast.Parse("any=naming, scrambled", columns)
	fmt.Println(c.Weights, c.IsF())

	_, err = contrast.Parse("x=naming - faces", columns)
	fmt.Println(err)
	// Output:
	// naming-scrambled [[1 -1 0 0]] false
	// [[0.5 0.5 -1 0]]
	// [[1 0 0 0] [0 1 0 0]] true
	// "faces" is not a design column (have: naming, scrambled, rest-fix, intercept)
}

func ExampleRank() {
	// Column c is a + b: the design cannot tell a from c, but a - b is
	// estimable.
	x := mat.NewDense(4, 3, []float64{
		1, 0, 1,
		0, 1, 1,
		1, 1, 2,
		0, 0, 0,
	})
	columns := []string{"a", "b", "c"}
	c, _ := contrast.Parse("f=a - b, b - a", columns)
	q, err := contrast.Rank(c, x)
	fmt.Println(q, err)

	c, _ = contrast.Parse("a=a", columns)
	fmt.Println(contrast.Estimable(c, x) != nil)
	// Output:
	// 1 <nil>
	// true
}
