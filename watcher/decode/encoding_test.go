package decode

import (
	"errors"
	"strings"
	"testing"
)

// TestForeignEncodingRefused: a file starting with a UTF-16 or UTF-32
// byte-order mark stops with ErrEncoding naming the encoding, at any
// chunking; a UTF-8 mark is skipped as before.
func TestForeignEncodingRefused(t *testing.T) {
	tests := []struct {
		name, in, want string
	}{
		{"utf16le", "\xff\xfex\x00,\x00y\x00\n\x00", "UTF-16 little-endian"},
		{"utf16be", "\xfe\xff\x00x\x00,\x00y\x00\n", "UTF-16 big-endian"},
		{"utf32le", "\xff\xfe\x00\x00x\x00\x00\x00", "UTF-32 little-endian"},
		{"utf32be", "\x00\x00\xfe\xff\x00\x00\x00x", "UTF-32 big-endian"},
		{"utf8", "\xef\xbb\xbfx,y\n1,2\n", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			for _, chunk := range []int{1, 2, 3, len(tt.in)} {
				d := NewDecoder("f.csv", Dialect{})
				var err error
				var recs int
				buf := []byte{}
				for i := 0; i < len(tt.in) && err == nil; i += chunk {
					buf = append(buf, tt.in[i:min(i+chunk, len(tt.in))]...)
					var n int
					n, err = d.Feed(buf, i+chunk >= len(tt.in), func(Record) error { recs++; return nil })
					buf = buf[n:]
				}
				if tt.want == "" {
					if err != nil || recs != 1 {
						t.Errorf("chunk %d: %d records, %v; want 1, nil", chunk, recs, err)
					}
					continue
				}
				if !errors.Is(err, ErrEncoding) || !strings.Contains(err.Error(), tt.want) {
					t.Errorf("chunk %d: %v; want ErrEncoding naming %s", chunk, err, tt.want)
				}
			}
		})
	}
}
