package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

// TestInspectCSVFormat reads the csv output back with encoding/csv: one
// record per row with as many fields as the header, quoted names intact,
// and the same numbers (to 10 digits) as the JSON output; the parallel
// writer gives the same bytes as a single worker.
func TestInspectCSVFormat(t *testing.T) {
	args := []string{"inspect", fixture("flow.csv"), "--response", "flow rate (l/min)",
		"--terms", `"pressure drop (kPa)", "fluid temp", "pressure drop (kPa)"*"fluid temp"`}
	out, _, code := runPlumb(t, "", append(args, "--format", "csv")...)
	if code != 0 {
		t.Fatalf("exit code %d", code)
	}
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatalf("csv output does not parse: %v", err)
	}
	if len(recs) != 41 {
		t.Fatalf("%d records, want header + 40", len(recs))
	}
	head := recs[0]
	col := map[string]int{}
	for i, h := range head {
		col[h] = i
	}
	for _, want := range []string{"row", "line", "leverage", "cooks_distance", `dfbetas["pressure drop (kPa)"*"fluid temp"]`, "dfbetas[intercept]", "covratio", "outlier_p_bonferroni", "flags"} {
		if _, ok := col[want]; !ok {
			t.Errorf("header lacks %q: %q", want, head)
		}
	}
	jout, _, _ := runPlumb(t, "", append(args, "--format", "json")...)
	var js inspectJSON
	if err := json.Unmarshal([]byte(jout), &js); err != nil {
		t.Fatal(err)
	}
	for i, rec := range recs[1:] {
		h, err := strconv.ParseFloat(rec[col["leverage"]], 64)
		if err != nil {
			t.Fatalf("row %d leverage %q: %v", i+1, rec[col["leverage"]], err)
		}
		if want := *js.Rows[i].Leverage; math.Abs(h-want) > 1e-9*math.Abs(want) {
			t.Errorf("row %d leverage %v in csv, %v in json", i+1, h, want)
		}
		if rec[col["row"]] != strconv.Itoa(js.Rows[i].Row) {
			t.Errorf("row %d: row field %q", i+1, rec[col["row"]])
		}
	}

	// Parallel and single-worker output agree, over several chunks.
	var big bytes.Buffer
	bw := bufio.NewWriter(&big)
	writeBenchCSV(bw, 3*csvChunk+17, 5)
	bw.Flush()
	file := filepath.Join(t.TempDir(), "big.csv")
	if err := os.WriteFile(file, big.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	bargs := append([]string{"inspect", file}, benchArgs...)
	par, _, code := runPlumb(t, "", bargs...)
	if code != 0 {
		t.Fatalf("exit code %d", code)
	}
	prev := runtime.GOMAXPROCS(1)
	seq, _, _ := runPlumb(t, "", bargs...)
	runtime.GOMAXPROCS(prev)
	if par != seq {
		t.Errorf("parallel csv output differs from single-worker output:\n%s", firstDiff(par, seq))
	}
	if n := strings.Count(par, "\n"); n != 3*csvChunk+17+1 {
		t.Errorf("%d lines, want %d", n, 3*csvChunk+17+1)
	}
}

// benchArgs is the 6-coefficient model the benchmark fits.
var benchArgs = []string{"--response", "reading", "--terms", "emf_mv, bath_c, rh_pct, pressure_kpa, emf_mv^2", "--format", "csv"}

// writeBenchCSV writes the seeded benchmark data of an invented
// thermocouple calibration bench (the fictitious Ketterby instrument
// workshop). testdata/bench/inspect_vs_r.sh writes its file through
// TestWriteBenchCSV, so the Go benchmark and the comparison with R read
// the same bytes.
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

// TestWriteBenchCSV writes the benchmark CSV to $PLUMB_BENCH_CSV
// ($PLUMB_BENCH_ROWS rows, default 100,000, seed 1) for
// testdata/bench/inspect_vs_r.sh; without the variable it does nothing.
func TestWriteBenchCSV(t *testing.T) {
	path := os.Getenv("PLUMB_BENCH_CSV")
	if path == "" {
		t.Skip("set PLUMB_BENCH_CSV to write the benchmark file")
	}
	rows := 100000
	if v := os.Getenv("PLUMB_BENCH_ROWS"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			t.Fatalf("PLUMB_BENCH_ROWS = %q: want a positive number", v)
		}
		rows = n
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<16)
	writeBenchCSV(w, rows, 1)
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

// BenchmarkInspectCSV times the whole command on a 100,000-row CSV with a
// 6-coefficient model: read, parse, fit, diagnose, judge and write every
// row's measures as CSV (to io.Discard).
func BenchmarkInspectCSV(b *testing.B) {
	for _, rows := range []int{1000, 100000} {
		b.Run("rows="+strconv.Itoa(rows), func(b *testing.B) {
			file := filepath.Join(b.TempDir(), "bench.csv")
			fh, err := os.Create(file)
			if err != nil {
				b.Fatal(err)
			}
			w := bufio.NewWriter(fh)
			writeBenchCSV(w, rows, 1)
			if err := w.Flush(); err != nil {
				b.Fatal(err)
			}
			fh.Close()
			st, _ := os.Stat(file)
			b.SetBytes(st.Size())
			e := &env{stdin: strings.NewReader(""), stdout: io.Discard, stderr: io.Discard, getenv: func(string) string { return "" }}
			args := append([]string{"inspect", file}, benchArgs...)
			b.ReportAllocs()
			for b.Loop() {
				if code := runMain(context.Background(), e, args); code != 0 {
					b.Fatalf("exit code %d", code)
				}
			}
		})
	}
}
