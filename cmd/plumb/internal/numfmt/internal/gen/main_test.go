package main

import (
	"bytes"
	"os"
	"testing"
)

// TestCommittedTable: the committed pow10_table.go is byte for byte what
// the generator writes (run `go generate ./cmd/plumb/internal/numfmt`
// after changing the generator).
func TestCommittedTable(t *testing.T) {
	want, err := Source()
	if err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile("../../pow10_table.go")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Error("pow10_table.go differs from the generator's output; run go generate ./cmd/plumb/internal/numfmt")
	}
}
