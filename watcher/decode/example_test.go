package decode_test

import (
	"fmt"

	"plumb/watcher/decode"
)

// A file arrives in two pieces; the partial last line waits for its
// newline. Invented demo data.
func ExampleDecoder_Feed() {
	dec := decode.NewDecoder("rig3/run7.csv", decode.Dialect{Delimiter: ';', DecimalComma: true, Comment: "#"})
	if err := dec.Select([]string{"emf_mv", "temp_c"}, []string{"probe"}); err != nil {
		fmt.Println(err)
		return
	}
	emit := func(r decode.Record) error {
		if r.Err != nil {
			fmt.Println("refused:", r.Err)
			return nil
		}
		fmt.Println(r.Line, r.Values, r.Text)
		return nil
	}
	buf := []byte("# bath 2\nprobe;temp_c;emf_mv\nK1;20,0;0,798\nK1;25,0;12..4\nK1;30,0;1,2")
	n, _ := dec.Feed(buf, false, emit)
	fmt.Println("left for later:", string(buf[n:]))
	buf = append(buf[n:], "03\n"...)
	dec.Feed(buf, false, emit)
	// Output:
	// 3 [0.798 20] [K1]
	// refused: rig3/run7.csv:4:9: column "emf_mv" (field 3): not a number: "12..4"
	// left for later: K1;30,0;1,2
	// 5 [1.203 30] [K1]
}
