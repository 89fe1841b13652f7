package web

import (
	"net/http"
	"time"
)

// Limits of the HTTP server against slow or greedy clients. Each bounds
// what one connection may hold, so that clients that open connections
// and then stall cannot pile up open files and goroutines.
const (
	// DefaultReadHeaderTimeout is how long a client may take to send the
	// request line and headers.
	DefaultReadHeaderTimeout = 5 * time.Second
	// DefaultReadTimeout is how long a client may take to send the whole
	// request, body included: a request that announces a body and never
	// sends it is cut off after this. The API's bodies are at most 64 KiB
	// of JSON.
	DefaultReadTimeout = 15 * time.Second
	// DefaultWriteTimeout is how long the answer to one request may take,
	// from the end of its headers; every call to the Source is bounded by
	// Options.Timeout (10 s by default) well within it.
	DefaultWriteTimeout = 60 * time.Second
	// DefaultIdleTimeout is how long a kept-alive connection may wait for
	// its next request. The dashboard polls every few seconds, so its
	// connection is reused; an abandoned one is closed.
	DefaultIdleTimeout = 60 * time.Second
	// DefaultMaxHeaderBytes bounds the request line and headers
	// (net/http allows 4 KiB of slack beyond it); a larger header is
	// answered 431 Request Header Fields Too Large.
	DefaultMaxHeaderBytes = 32 << 10
)

// Limits sets the server's timeouts and header size limit; zero fields
// take the defaults above.
type Limits struct {
	ReadHeader, Read, Write, Idle time.Duration
	MaxHeaderBytes                int
}

func (l Limits) withDefaults() Limits {
	def := func(d *time.Duration, v time.Duration) {
		if *d <= 0 {
			*d = v
		}
	}
	def(&l.ReadHeader, DefaultReadHeaderTimeout)
	def(&l.Read, DefaultReadTimeout)
	def(&l.Write, DefaultWriteTimeout)
	def(&l.Idle, DefaultIdleTimeout)
	if l.MaxHeaderBytes <= 0 {
		l.MaxHeaderBytes = DefaultMaxHeaderBytes
	}
	return l
}

// Harden sets srv's read-header, read, write and idle timeouts and its
// header size limit from l (zero fields: the defaults).
func Harden(srv *http.Server, l Limits) {
	l = l.withDefaults()
	srv.ReadHeaderTimeout = l.ReadHeader
	srv.ReadTimeout = l.Read
	srv.WriteTimeout = l.Write
	srv.IdleTimeout = l.Idle
	srv.MaxHeaderBytes = l.MaxHeaderBytes
}

// NewServer returns an http.Server for h with the limits of l (zero
// fields: the defaults). The caller serves it on its listener and shuts
// it down.
func NewServer(h http.Handler, l Limits) *http.Server {
	srv := &http.Server{Handler: h}
	Harden(srv, l)
	return srv
}
