package report

import (
	"fmt"
	"io"
	"math/rand/v2"
	"testing"

	"plumb/cmd/plumb/internal/view/viewtest"
)

// BenchmarkWrite renders the full HTML report (five charts and the
// tables) for a straight-line model of n rows.
func BenchmarkWrite(b *testing.B) {
	for _, n := range []int{100, 1000, 10000} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			r := rand.New(rand.NewPCG(3, 4))
			x, y := make([]float64, n), make([]float64, n)
			for i := range n {
				x[i] = float64(i)
				y[i] = 1 + 0.5*x[i] + r.NormFloat64()
			}
			l := viewtest.Line{Name: "m", Response: "y", Predictor: "x", File: "m.csv", X: x, Y: y}
			d, err := viewtest.StraightLine(l)
			if err != nil {
				b.Fatal(err)
			}
			fits := viewtest.LineHistory(viewtest.Line{Name: "m", Predictor: "x", X: x[:min(n, 300)], Y: y[:min(n, 300)]})
			b.ReportAllocs()
			for b.Loop() {
				if err := Write(io.Discard, d, fits, nil, Options{}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
