package alerts

import (
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"strconv"
	"strings"
	"time"
)

// SignatureHeader is the HTTP header carrying a webhook signature:
//
//	Plumb-Signature: t=<unix seconds>,v1=<hex HMAC-SHA256>
//
// The HMAC (RFC 2104, SHA-256) is keyed with the route's secret and taken
// over the ASCII timestamp, a ".", and the raw request body. A receiver
// should verify the raw bytes (never re-serialised JSON), compare in
// constant time, reject timestamps too far from its clock and dedupe by the
// event id. Several v1 values may appear (secret rotation); any match is
// accepted.
const SignatureHeader = "Plumb-Signature"

// DefaultTolerance is the largest clock difference VerifySignature accepts
// when given none.
const DefaultTolerance = 5 * time.Minute

// Signature verification errors.
var (
	ErrNoSignature    = errors.New("alerts: signature header missing or malformed")
	ErrBadSignature   = errors.New("alerts: signature does not match")
	ErrStaleSignature = errors.New("alerts: signature timestamp outside tolerance")
)

// mac is HMAC-SHA256 over ts + "." + body, ts as written in the header.
func mac(secret []byte, ts string, body []byte) []byte {
	h := hmac.New(sha256.New, secret)
	h.Write([]byte(ts))
	h.Write([]byte{'.'})
	h.Write(body)
	return h.Sum(nil)
}

// Sign returns the SignatureHeader value for body sent at time t.
func Sign(secret Secret, t time.Time, body []byte) string {
	ts := strconv.FormatInt(t.Unix(), 10)
	return "t=" + ts + ",v1=" + hex.EncodeToString(mac(secret.bytes(), ts, body))
}

// VerifySignature checks a SignatureHeader value against the raw body. It
// returns nil when a v1 signature matches and the timestamp is within
// tolerance of now (tolerance <= 0 means DefaultTolerance), else an error
// wrapping ErrNoSignature, ErrBadSignature or ErrStaleSignature.
func VerifySignature(secret []byte, header string, body []byte, now time.Time, tolerance time.Duration) error {
	if tolerance <= 0 {
		tolerance = DefaultTolerance
	}
	var (
		ts    int64
		tsRaw string
		haveT bool
		sigs  [][]byte
	)
	for _, part := range strings.Split(header, ",") {
		k, v, ok := strings.Cut(strings.TrimSpace(part), "=")
		if !ok {
			return ErrNoSignature
		}
		switch k {
		case "t":
			n, err := strconv.ParseInt(v, 10, 64)
			if err != nil || haveT || v == "" || v[0] < '0' || v[0] > '9' {
				return ErrNoSignature
			}
			ts, tsRaw, haveT = n, v, true
		case "v1":
			b, err := hex.DecodeString(v)
			if err != nil {
				return ErrNoSignature
			}
			sigs = append(sigs, b)
		}
	}
	if !haveT || len(sigs) == 0 {
		return ErrNoSignature
	}
	want := mac(secret, tsRaw, body)
	match := false
	for _, s := range sigs {
		if hmac.Equal(s, want) {
			match = true
		}
	}
	if !match {
		return ErrBadSignature
	}
	d := now.Sub(time.Unix(ts, 0))
	if d < 0 {
		d = -d
	}
	if d > tolerance {
		return ErrStaleSignature
	}
	return nil
}
