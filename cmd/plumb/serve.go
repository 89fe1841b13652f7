package main

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"sync"
	"time"

	"plumb/cmd/plumb/internal/access"
	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
	"plumb/cmd/plumb/internal/web"
)

// server is the HTTP face of a running daemon: the API, the dashboard and
// /metrics, served from the daemon's view. The command that runs the
// daemon owns it; the pipeline knows nothing of HTTP.
type server struct {
	addr string
	stop context.CancelFunc
	wg   sync.WaitGroup
}

// serve starts serving d on cfg.Listen (nothing when it is empty). Close
// shuts the server down, giving requests in flight 3 seconds.
func serve(d *daemon.Daemon, cfg *config.Config, log *slog.Logger) (*server, error) {
	s := &server{stop: func() {}}
	if cfg.Listen == "" {
		return s, nil
	}
	ln, err := net.Listen("tcp", cfg.Listen)
	if err != nil {
		return nil, fmt.Errorf("listen %s: %w", cfg.Listen, err)
	}
	token := ""
	if cfg.TokenEnv != "" {
		token = os.Getenv(cfg.TokenEnv)
	}
	gate, err := access.New(cfg.AccessConfig(os.Getenv))
	if err != nil {
		ln.Close()
		return nil, err
	}
	h := web.New(d.View(), web.Options{Token: token, Registry: d.Registry(), Logger: log, Gate: gate})
	// Only requests naming this server are served (DNS rebinding), and
	// slow or idle clients are cut off (web.Limits' defaults).
	srv := web.NewServer(web.CheckHost(h, cfg.Listen, cfg.PublicHosts()), web.Limits{})
	s.addr = ln.Addr().String()
	log.Info("serving", "addr", "http://"+s.addr+"/")
	ctx, stop := context.WithCancel(context.Background())
	s.stop = stop
	s.wg.Add(2)
	go func() {
		defer s.wg.Done()
		if err := srv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			log.Error("http", "err", err)
		}
	}()
	go func() {
		defer s.wg.Done()
		<-ctx.Done()
		sctx, cancel := context.WithTimeout(context.Background(), 3*time.Second)
		defer cancel()
		_ = srv.Shutdown(sctx)
	}()
	return s, nil
}

// Addr is the listener's address ("" when not serving).
func (s *server) Addr() string { return s.addr }

// Close shuts the server down and waits for it.
func (s *server) Close() {
	s.stop()
	s.wg.Wait()
}
