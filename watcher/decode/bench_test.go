package decode

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"io"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// benchFile makes an invented calibration log: rows x 6 columns (a text
// sample id and five numbers of mixed form).
func benchFile(rows int) []byte {
	rng := rand.New(rand.NewPCG(7, 7))
	var b strings.Builder
	b.WriteString("sample,temp_c,emf_mv,flow_lpm,drift,pressure_kpa\n")
	for i := range rows {
		fmt.Fprintf(&b, "S%06d,%s,%s,%s,%s,%s\n", i,
			strconv.FormatFloat(20+rng.NormFloat64(), 'f', 3, 64),
			strconv.FormatFloat(0.8+rng.Float64()*40, 'f', 4, 64),
			strconv.FormatFloat(rng.Float64()*12, 'f', 2, 64),
			strconv.FormatFloat(rng.NormFloat64()*1e-4, 'e', 3, 64),
			strconv.Itoa(95+rng.IntN(15)))
	}
	return []byte(b.String())
}

func BenchmarkDecode(b *testing.B) {
	for _, rows := range []int{1000, 100000} {
		data := benchFile(rows)
		for _, chunk := range []int{64 << 10, len(data)} {
			name := fmt.Sprintf("rows=%d/chunk=%d", rows, chunk)
			b.Run(name, func(b *testing.B) {
				b.ReportAllocs()
				b.SetBytes(int64(len(data)))
				var sum float64
				for b.Loop() {
					d := NewDecoder("bench.csv", Dialect{})
					if err := d.Select([]string{"temp_c", "emf_mv", "flow_lpm", "drift", "pressure_kpa"}, []string{"sample"}); err != nil {
						b.Fatal(err)
					}
					n := 0
					emit := func(r Record) error {
						if r.Err != nil {
							return r.Err
						}
						sum += r.Values[1]
						n++
						return nil
					}
					for off := 0; off < len(data); {
						end := min(off+chunk, len(data))
						k, err := d.Feed(data[off:end], end == len(data), emit)
						if err != nil {
							b.Fatal(err)
						}
						if k == 0 && end < len(data) {
							// need more: this simple loop widens the window
							end = min(end+chunk, len(data))
							k, err = d.Feed(data[off:end], end == len(data), emit)
							if err != nil {
								b.Fatal(err)
							}
						}
						off += k
					}
					if n != rows {
						b.Fatalf("decoded %d rows, want %d", n, rows)
					}
				}
				b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(rows), "ns/row")
				_ = sum
			})
		}
	}
}

// BenchmarkParseNumber compares the number path with strconv.ParseFloat
// on the same cells.
func BenchmarkParseNumber(b *testing.B) {
	cells := [][]byte{[]byte("20.125"), []byte("17.0311"), []byte("3.07"), []byte("-1.234e-05"), []byte("101")}
	b.Run("fast", func(b *testing.B) {
		b.ReportAllocs()
		var s float64
		for b.Loop() {
			for _, c := range cells {
				v, _ := parseNumber(c, false)
				s += v
			}
		}
		_ = s
	})
	b.Run("strconv", func(b *testing.B) {
		b.ReportAllocs()
		var s float64
		for b.Loop() {
			for _, c := range cells {
				v, _ := strconv.ParseFloat(string(c), 64)
				s += v
			}
		}
		_ = s
	})
}

// BenchmarkDecodeStdlib is the reference point: encoding/csv and
// strconv.ParseFloat on the same 100,000-row file.
func BenchmarkDecodeStdlib(b *testing.B) {
	data := benchFile(100000)
	b.ReportAllocs()
	b.SetBytes(int64(len(data)))
	var sum float64
	for b.Loop() {
		r := csv.NewReader(bytes.NewReader(data))
		r.ReuseRecord = true
		if _, err := r.Read(); err != nil {
			b.Fatal(err)
		}
		for {
			rec, err := r.Read()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			for _, f := range rec[1:] {
				v, err := strconv.ParseFloat(f, 64)
				if err != nil {
					b.Fatal(err)
				}
				sum += v
			}
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/100000, "ns/row")
	_ = sum
}
