//go:build ignore

// gen_bench_csv writes the seeded benchmark CSV used by inspect_vs_r.sh:
// readings from an invented thermocouple calibration bench (the fictitious
// Ketterby instrument workshop), one row per reading, with two text columns
// that the model ignores and five numeric ones.
//
//	go run testdata/bench/gen_bench_csv.go -rows 100000 -seed 1 > bench.csv
//
// The model the benchmark fits has 6 coefficients:
//
//	--response reading --terms "emf_mv, bath_c, rh_pct, pressure_kpa, emf_mv^2"
//
// The same generator (same seed, same bytes) is in
// cmd/plumb/inspect_test.go for BenchmarkInspectCSV; keep them in step.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"strconv"
)

func main() {
	rows := flag.Int("rows", 100000, "number of data rows")
	seed := flag.Uint64("seed", 1, "random seed")
	flag.Parse()
	w := bufio.NewWriterSize(os.Stdout, 1<<16)
	writeBenchCSV(w, *rows, *seed)
	if err := w.Flush(); err != nil {
		fmt.Fprintln(os.Stderr, "gen_bench_csv:", err)
		os.Exit(1)
	}
}

func writeBenchCSV(w *bufio.Writer, rows int, seed uint64) {
	r := rand.New(rand.NewPCG(seed, 0x6b65747465726279))
	stations := []string{"bench A", "bench B", `"bench C, left"`, "bench D"}
	w.WriteString("sample,station,emf_mv,bath_c,rh_pct,pressure_kpa,reading\n")
	var b []byte
	for i := 0; i < rows; i++ {
		emf := 2 + 48*r.Float64()
		bath := 15 + 20*r.Float64()
		rh := 25 + 40*r.Float64()
		kpa := 98 + 6*r.Float64()
		y := 1.2 + 24.1*emf - 0.071*emf*emf + 0.35*bath - 0.02*rh + 0.08*kpa + 0.9*r.NormFloat64()
		if i%997 == 0 {
			y += 15 // a mis-keyed reading now and then
		}
		b = b[:0]
		b = append(b, 'S')
		b = strconv.AppendInt(b, int64(i+1), 10)
		b = append(b, ',')
		b = append(b, stations[i%len(stations)]...)
		b = append(b, ',')
		b = strconv.AppendFloat(b, emf, 'f', 4, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, bath, 'f', 3, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, rh, 'f', 1, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, kpa, 'f', 3, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, y, 'f', 3, 64)
		b = append(b, '\n')
		w.Write(b)
	}
}
