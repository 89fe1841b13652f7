package web

import (
	"bufio"
	"errors"
	"io"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/metrics"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// Short limits for the raw-socket tests; the defaults are checked apart.
var testLimits = Limits{
	ReadHeader:     300 * time.Millisecond,
	Read:           500 * time.Millisecond,
	Write:          2 * time.Second,
	Idle:           400 * time.Millisecond,
	MaxHeaderBytes: 4 << 10,
}

// startServer serves the dashboard's handler (demo data, metrics on),
// behind CheckHost with the public name "plumb.lab.example", on a fresh
// 127.0.0.1 port with limits l. It returns the address.
func startServer(t *testing.T, l Limits) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	m := metrics.New()
	m.AddModel("bench-b")
	h := CheckHost(New(viewtest.Demo(), Options{Registry: m.Registry()}), ln.Addr().String(), []string{"plumb.lab.example"})
	srv := NewServer(h, l)
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ln) }()
	t.Cleanup(func() {
		_ = srv.Close()
		if err := <-done; !errors.Is(err, http.ErrServerClosed) {
			t.Errorf("Serve: %v", err)
		}
	})
	return ln.Addr().String()
}

func dial(t *testing.T, addr string) net.Conn {
	t.Helper()
	c, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

// waitClosed reads from c until the server closes it and returns how
// long that took from start; it fails the test when the server keeps it
// open longer than limit.
func waitClosed(t *testing.T, c net.Conn, start time.Time, limit time.Duration) time.Duration {
	t.Helper()
	if err := c.SetReadDeadline(start.Add(limit)); err != nil {
		t.Fatal(err)
	}
	_, err := io.Copy(io.Discard, c)
	var ne net.Error
	if errors.As(err, &ne) && ne.Timeout() {
		t.Fatalf("the server still holds the connection after %v", limit)
	}
	return time.Since(start)
}

// TestSlowBodyIsCut: a POST that announces a body and never sends it is
// closed by the server after the read timeout (the slow client:
// without it each such connection stayed open for good).
func TestSlowBodyIsCut(t *testing.T) {
	addr := startServer(t, testLimits)
	for _, path := range []string{"/api/v1/alerts/sp-1/ack", "/api/v1/models"} {
		t.Run(path, func(t *testing.T) {
			c := dial(t, addr)
			start := time.Now()
			_, err := io.WriteString(c, "POST "+path+" HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\nContent-Length: 1000\r\n\r\n{")
			if err != nil {
				t.Fatal(err)
			}
			took := waitClosed(t, c, start, testLimits.Read+2*time.Second)
			if took < testLimits.Read-50*time.Millisecond {
				t.Errorf("closed after %v, before the read timeout %v", took, testLimits.Read)
			}
			t.Logf("closed after %v (read timeout %v)", took, testLimits.Read)
		})
	}
}

// TestSlowHeaderIsCut: headers that never end are cut after the
// read-header timeout.
func TestSlowHeaderIsCut(t *testing.T) {
	addr := startServer(t, testLimits)
	c := dial(t, addr)
	start := time.Now()
	if _, err := io.WriteString(c, "GET /api/v1/models HTTP/1.1\r\nHost: 127.0.0.1\r\nX-Slow: "); err != nil {
		t.Fatal(err)
	}
	took := waitClosed(t, c, start, testLimits.ReadHeader+2*time.Second)
	t.Logf("closed after %v (read-header timeout %v)", took, testLimits.ReadHeader)
}

// TestIdleKeepAliveIsClosed: after a complete answer, a kept-alive
// connection that sends nothing more is closed after the idle timeout.
func TestIdleKeepAliveIsClosed(t *testing.T) {
	addr := startServer(t, testLimits)
	c := dial(t, addr)
	if _, err := io.WriteString(c, "GET /healthz HTTP/1.1\r\nHost: localhost\r\n\r\n"); err != nil {
		t.Fatal(err)
	}
	br := bufio.NewReader(c)
	resp, err := http.ReadResponse(br, nil)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(io.Discard, resp.Body); err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 || resp.Close {
		t.Fatalf("status %d, close %v: want 200 on a kept-alive connection", resp.StatusCode, resp.Close)
	}
	start := time.Now()
	if err := c.SetReadDeadline(start.Add(testLimits.Idle + 2*time.Second)); err != nil {
		t.Fatal(err)
	}
	_, err = io.Copy(io.Discard, br)
	var ne net.Error
	if errors.As(err, &ne) && ne.Timeout() {
		t.Fatalf("idle connection still open after %v", testLimits.Idle+2*time.Second)
	}
	took := time.Since(start)
	if took < testLimits.Idle-50*time.Millisecond {
		t.Errorf("closed after %v, before the idle timeout %v", took, testLimits.Idle)
	}
	t.Logf("idle connection closed after %v (idle timeout %v)", took, testLimits.Idle)
}

// rawRequest sends one request with the given Host and returns the answer.
func rawRequest(t *testing.T, addr, method, path, host, extra string) *http.Response {
	t.Helper()
	c := dial(t, addr)
	_ = c.SetDeadline(time.Now().Add(5 * time.Second))
	req := method + " " + path + " HTTP/1.1\r\nHost: " + host + "\r\n" + extra + "Connection: close\r\n"
	if method == "POST" {
		req += "Content-Type: application/json\r\nContent-Length: 2\r\n\r\n{}"
	} else {
		req += "\r\n"
	}
	if _, err := io.WriteString(c, req); err != nil {
		t.Fatal(err)
	}
	resp, err := http.ReadResponse(bufio.NewReader(c), nil)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	resp.Body = io.NopCloser(strings.NewReader(string(b)))
	return resp
}

// TestOversizeHeader: a header block beyond the limit is answered 431.
func TestOversizeHeader(t *testing.T) {
	addr := startServer(t, testLimits)
	// net/http allows 4 KiB of slack beyond MaxHeaderBytes.
	big := "X-Big: " + strings.Repeat("a", testLimits.MaxHeaderBytes+8<<10) + "\r\n"
	resp := rawRequest(t, addr, "GET", "/api/v1/models", "127.0.0.1", big)
	if resp.StatusCode != http.StatusRequestHeaderFieldsTooLarge {
		t.Errorf("status %d, want 431", resp.StatusCode)
	}
	// Under the limit it is served.
	small := "X-Small: " + strings.Repeat("a", testLimits.MaxHeaderBytes/2) + "\r\n"
	if resp := rawRequest(t, addr, "GET", "/api/v1/models", "127.0.0.1", small); resp.StatusCode != 200 {
		t.Errorf("status %d under the limit, want 200", resp.StatusCode)
	}
}

// TestHostChecked: every route refuses a Host that is not this server's
// (DNS rebinding), before doing anything; the listen address, localhost
// names and the configured public names are served.
func TestHostChecked(t *testing.T) {
	addr := startServer(t, testLimits)
	_, port, _ := net.SplitHostPort(addr)
	routes := []struct{ method, path string }{
		{"GET", "/"},
		{"GET", "/healthz"},
		{"GET", "/readyz"},
		{"GET", "/metrics"},
		{"GET", "/api/v1/version"},
		{"GET", "/api/v1/models"},
		{"GET", "/api/v1/models/bench-b"},
		{"GET", "/api/v1/models/bench-b/fits"},
		{"GET", "/api/v1/models/bench-b/observations"},
		{"GET", "/api/v1/quarantine"},
		{"GET", "/api/v1/alerts"},
		{"GET", "/api/v1/alerts/sp-1"},
		{"POST", "/api/v1/alerts/sp-1/ack"},
		{"POST", "/api/v1/alerts/sp-1/resolve"},
		{"GET", "/models/bench-b"},
		{"GET", "/alerts"},
		{"GET", "/static/bob.svg"},
		{"GET", "/no/such/page"},
	}
	for _, host := range []string{"attacker.example", "attacker.example:" + port, "127.0.0.1.attacker.example", "localhost.attacker.example:" + port, "plumb.lab.example.attacker.example", "10.0.0.7:" + port} {
		for _, rt := range routes {
			resp := rawRequest(t, addr, rt.method, rt.path, host, "")
			body, _ := io.ReadAll(resp.Body)
			if resp.StatusCode != http.StatusMisdirectedRequest {
				t.Errorf("%s %s with Host %s: status %d, want 421", rt.method, rt.path, host, resp.StatusCode)
				continue
			}
			if !strings.Contains(string(body), "does not answer to the host name") || len(body) > 300 {
				t.Errorf("%s %s with Host %s: body %q", rt.method, rt.path, host, body)
			}
		}
	}
	for _, host := range []string{"127.0.0.1:" + port, "127.0.0.1", "localhost:" + port, "LOCALHOST", "dash.localhost", "[::1]:" + port, "plumb.lab.example", "PLUMB.lab.example.:443"} {
		for _, rt := range routes {
			if rt.method != "GET" || rt.path == "/no/such/page" {
				continue
			}
			if resp := rawRequest(t, addr, rt.method, rt.path, host, ""); resp.StatusCode == http.StatusMisdirectedRequest {
				t.Errorf("%s %s with Host %s: refused", rt.method, rt.path, host)
			}
		}
	}
}

// TestHostAllowedTable: the rule itself, including the listen address
// on every interface (any IP literal) and on one address.
func TestHostAllowedTable(t *testing.T) {
	ok := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { w.WriteHeader(204) })
	for _, tc := range []struct {
		listen, host string
		public       []string
		want         bool
	}{
		{"127.0.0.1:8765", "127.0.0.1:8765", nil, true},
		{"127.0.0.1:8765", "127.0.0.2", nil, true},
		{"127.0.0.1:8765", "[::1]:8765", nil, true},
		{"127.0.0.1:8765", "localhost", nil, true},
		{"127.0.0.1:8765", "a.b.localhost:1", nil, true},
		{"127.0.0.1:8765", "localhostx", nil, false},
		{"127.0.0.1:8765", "192.168.1.5:8765", nil, false},
		{"192.168.1.5:8765", "192.168.1.5:8765", nil, true},
		{"192.168.1.5:8765", "192.168.1.6:8765", nil, false},
		{"0.0.0.0:8765", "192.168.1.6:8765", nil, true},
		{"[::]:8765", "[fe80::1]:8765", nil, true},
		{":8765", "10.1.2.3", nil, true},
		{":8765", "evil.example", nil, false},
		{"plumb-host:8765", "plumb-host:8765", nil, true},
		{"127.0.0.1:8765", "plumb.lab.example", []string{"Plumb.Lab.Example."}, true},
		{"127.0.0.1:8765", "lab.example", []string{"plumb.lab.example"}, false},
		{"127.0.0.1:8765", "", nil, true}, // HTTP/1.0 without Host: not a browser
	} {
		h := CheckHost(ok, tc.listen, tc.public)
		w := serve(t, h, call{method: "GET", path: "/", host: tc.host})
		if tc.host == "" {
			r, _ := http.NewRequest("GET", "/", nil)
			r.Host = ""
			rec := &statusRecorder{}
			h.ServeHTTP(rec, r)
			if got := rec.code == 204; got != tc.want {
				t.Errorf("listen %s, empty Host: served %v, want %v", tc.listen, got, tc.want)
			}
			continue
		}
		if got := w.Code == 204; got != tc.want {
			t.Errorf("listen %s, Host %q, public %v: served %v (status %d), want %v", tc.listen, tc.host, tc.public, got, w.Code, tc.want)
		}
	}
}

type statusRecorder struct {
	code int
	h    http.Header
}

func (s *statusRecorder) Header() http.Header {
	if s.h == nil {
		s.h = http.Header{}
	}
	return s.h
}
func (s *statusRecorder) Write(b []byte) (int, error) { return len(b), nil }
func (s *statusRecorder) WriteHeader(c int)           { s.code = c }

// TestServerDefaults: NewServer sets every limit, from the documented
// constants when none is given.
func TestServerDefaults(t *testing.T) {
	srv := NewServer(http.NotFoundHandler(), Limits{})
	if srv.ReadHeaderTimeout != DefaultReadHeaderTimeout || srv.ReadTimeout != DefaultReadTimeout ||
		srv.WriteTimeout != DefaultWriteTimeout || srv.IdleTimeout != DefaultIdleTimeout || srv.MaxHeaderBytes != DefaultMaxHeaderBytes {
		t.Errorf("server limits %v %v %v %v %d", srv.ReadHeaderTimeout, srv.ReadTimeout, srv.WriteTimeout, srv.IdleTimeout, srv.MaxHeaderBytes)
	}
	srv = NewServer(http.NotFoundHandler(), testLimits)
	if srv.ReadTimeout != testLimits.Read || srv.MaxHeaderBytes != testLimits.MaxHeaderBytes {
		t.Errorf("given limits not applied: %v %d", srv.ReadTimeout, srv.MaxHeaderBytes)
	}
}
