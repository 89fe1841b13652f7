package alerts

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"time"
)

// StatusError is a webhook response outside 2xx. Body holds up to 512
// bytes of the response.
type StatusError struct {
	Code int
	Body string
}

func (e *StatusError) Error() string {
	s := fmt.Sprintf("receiver answered %d %s", e.Code, http.StatusText(e.Code))
	if e.Body != "" {
		s += ": " + e.Body
	}
	return s
}

// webhookSender POSTs the event in CloudEvents structured JSON mode.
type webhookSender struct {
	url    string
	secret Secret
	client *http.Client
	now    func() time.Time
}

func (s *webhookSender) Send(ctx context.Context, d Delivery) error {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, s.url, bytes.NewReader(d.Payload))
	if err != nil {
		return Permanent(err)
	}
	req.Header.Set("Content-Type", ContentType)
	req.Header.Set("User-Agent", "plumb-alerts/1")
	req.Header.Set("Idempotency-Key", d.EventID)
	if !s.secret.IsZero() {
		req.Header.Set(SignatureHeader, Sign(s.secret, s.now(), d.Payload))
	}
	resp, err := s.client.Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(io.LimitReader(resp.Body, 512))
	io.Copy(io.Discard, io.LimitReader(resp.Body, 1<<16))
	if resp.StatusCode >= 200 && resp.StatusCode < 300 {
		return nil
	}
	var e error = &StatusError{Code: resp.StatusCode, Body: strings.TrimSpace(string(body))}
	if after, ok := retryAfter(resp.Header.Get("Retry-After"), time.Now()); ok {
		e = &RetryAfterError{Err: e, After: after}
	}
	switch c := resp.StatusCode; {
	case c >= 400 && c < 500 && c != http.StatusRequestTimeout && c != http.StatusConflict &&
		c != http.StatusTooEarly && c != http.StatusTooManyRequests:
		return Permanent(e)
	}
	return e
}

// retryAfter parses a Retry-After value: seconds or an HTTP date.
func retryAfter(v string, now time.Time) (time.Duration, bool) {
	if v == "" {
		return 0, false
	}
	if n, err := strconv.Atoi(strings.TrimSpace(v)); err == nil && n >= 0 {
		return time.Duration(n) * time.Second, true
	}
	if t, err := http.ParseTime(v); err == nil {
		if d := t.Sub(now); d > 0 {
			return d, true
		}
		return 0, true
	}
	return 0, false
}
