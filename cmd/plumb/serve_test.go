package main

import (
	"bufio"
	"context"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/daemon"
)

// TestServeChecksHostAndCutsSlowClients: the HTTP face that run and demo
// start answers only to its own names (the listen host, localhost, the
// host of public_url) and closes a connection whose headers never
// finish within web.DefaultReadHeaderTimeout (5 s).
func TestServeChecksHostAndCutsSlowClients(t *testing.T) {
	if testing.Short() {
		t.Skip("waits for the header timeout")
	}
	dir := t.TempDir()
	src := `state = "plumb.db"
listen = "127.0.0.1:0"
public_url = "https://plumb.lab.example"
[[model]]
name = "bench"
folder = "in"
response = "y"
terms = ["x"]
`
	path := filepath.Join(dir, "plumb.toml")
	if err := os.WriteFile(path, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	cfg, err := loadConfig(path)
	if err != nil {
		t.Fatal(err)
	}
	log := slog.New(slog.DiscardHandler)
	d, err := daemon.New(context.Background(), cfg, daemon.Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	s, err := serve(d, cfg, log)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()

	for host, want := range map[string]int{
		"attacker.example":       http.StatusMisdirectedRequest,
		s.Addr():                 http.StatusOK,
		"localhost":              http.StatusOK,
		"plumb.lab.example":      http.StatusOK,
		"plumb.lab.example:8443": http.StatusOK,
	} {
		req, _ := http.NewRequest("GET", "http://"+s.Addr()+"/api/v1/models", nil)
		req.Host = host
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		if resp.StatusCode != want {
			t.Errorf("Host %s: status %d, want %d", host, resp.StatusCode, want)
		}
	}

	conn, err := net.Dial("tcp", s.Addr())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if _, err := io.WriteString(conn, "GET /healthz HTTP/1.1\r\nHost: localhost\r\nX-Slow: "); err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	conn.SetReadDeadline(time.Now().Add(15 * time.Second))
	line, err := bufio.NewReader(conn).ReadString('\n')
	took := time.Since(start)
	if took > 9*time.Second {
		t.Errorf("a client that never finished its headers was held %v", took)
	}
	if err == nil && !strings.Contains(line, "408") && !strings.Contains(line, "400") {
		t.Errorf("slow client got %q", line)
	}
}
