package numfmt_test

import (
	"fmt"
	"math"

	"plumb/cmd/plumb/internal/numfmt"
)

func ExampleAppendG() {
	var buf []byte
	for _, x := range []float64{1234567890.5, 1234567891.5, 0.000012345, 99999999995, 1e6, 0.0001, math.Copysign(0, -1), -2.5e-300, math.Inf(1)} {
		buf = numfmt.AppendG(buf[:0], x, 10)
		fmt.Println(string(buf))
	}
	// Output:
	// 1234567890
	// 1234567892
	// 1.2345e-05
	// 1e+11
	// 1000000
	// 0.0001
	// -0
	// -2.5e-300
	// +Inf
}
