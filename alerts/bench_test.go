package alerts

import (
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"strconv"
	"strings"
	"testing"
	"time"
)

// BenchmarkPointOrdinary is the per-row cost for the common case: a row
// that is not suspect and has no alert (no ledger access).
func BenchmarkPointOrdinary(b *testing.B) {
	h := newHarness(b, nil)
	ctx := context.Background()
	c := suspectRow(1)
	c.Outlier, c.Influential, c.Measures = false, false, nil
	b.ReportAllocs()
	for b.Loop() {
		if _, err := h.m.Point(ctx, c); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkPointRepeat is the cost of updating an open alert (decode,
// update, encode, one ledger write, no event).
func BenchmarkPointRepeat(b *testing.B) {
	h := newHarness(b, nil)
	ctx := context.Background()
	c := suspectRow(1)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := h.m.Point(ctx, c); err != nil {
			b.Fatal(err)
		}
		h.clock.Add(time.Second)
	}
}

func FuzzVerifySignature(f *testing.F) {
	now := time.Unix(1796025600, 0)
	f.Add(Sign(NewSecret([]byte("k")), now, []byte("{}")), []byte("{}"))
	f.Add("t=1796025600,v1=00", []byte("{}"))
	f.Add("t=,v1=", []byte(""))
	f.Add("v1=zz,t=1,t=2", []byte("x"))
	f.Fuzz(func(t *testing.T, header string, body []byte) {
		if VerifySignature([]byte("k"), header, body, now, time.Minute) != nil {
			return
		}
		// Accepted: the header must carry the true HMAC-SHA256 (RFC 2104)
		// of "<t>.<body>" for a t within a minute of now.
		var ts string
		for _, part := range strings.Split(header, ",") {
			if v, ok := strings.CutPrefix(strings.TrimSpace(part), "t="); ok {
				ts = v
			}
		}
		n, err := strconv.ParseInt(ts, 10, 64)
		if err != nil || n < now.Unix()-60 || n > now.Unix()+60 {
			t.Fatalf("accepted header %q with timestamp %q", header, ts)
		}
		m := hmac.New(sha256.New, []byte("k"))
		m.Write([]byte(ts + "."))
		m.Write(body)
		want := m.Sum(nil)
		// Hex digits are accepted in either case (the verifier decodes
		// them), so compare the decoded bytes, not the text.
		found := false
		for _, part := range strings.Split(header, ",") {
			v, ok := strings.CutPrefix(strings.TrimSpace(part), "v1=")
			if !ok {
				continue
			}
			if b, err := hex.DecodeString(v); err == nil && hmac.Equal(b, want) {
				found = true
			}
		}
		if !found {
			t.Fatalf("accepted forged header %q", header)
		}
	})
}
