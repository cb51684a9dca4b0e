// Package broker runs a NATS server inside the aggregator (when no broker
// URL is given) and inside tests, with JetStream and its file store when
// given a directory. Only the aggregator links it: importing
// the NATS server starts its process-statistics goroutine, which reads
// /proc/self/stat every second, a cost the agent has no use for.
package broker

import (
	"fmt"
	"net"
	"os"
	"strconv"
	"time"

	"github.com/nats-io/nats-server/v2/server"
)

// Embedded is a NATS server running inside this process.
type Embedded struct {
	srv      *server.Server
	storeDir string
}

// Options configures an embedded broker. Zero values mean loopback
// and a free port.
type Options struct {
	// Listen is host:port; "" means 127.0.0.1 on a free port.
	Listen string
	// ReadyTimeout bounds the wait for the server to accept connections;
	// zero means 5 seconds.
	ReadyTimeout time.Duration
	// StoreDir, if set, turns JetStream on with its file store in this
	// directory, created if missing; empty runs core NATS only.
	StoreDir string
}

// Start starts a broker and waits until it accepts connections.
func Start(opts Options) (*Embedded, error) {
	host, port := "127.0.0.1", -1
	if opts.Listen != "" {
		h, p, err := net.SplitHostPort(opts.Listen)
		if err != nil {
			return nil, fmt.Errorf("embedded broker listen %q: %w", opts.Listen, err)
		}
		n, err := strconv.Atoi(p)
		if err != nil {
			return nil, fmt.Errorf("embedded broker listen %q: port: %w", opts.Listen, err)
		}
		host, port = h, n
		if port == 0 {
			port = -1
		}
	}
	if opts.ReadyTimeout == 0 {
		opts.ReadyTimeout = 5 * time.Second
	}
	so := &server.Options{
		Host:                  host,
		Port:                  port,
		NoLog:                 true,
		NoSigs:                true,
		MaxPayload:            1 << 20,
		MaxPending:            256 << 20,
		WriteDeadline:         10 * time.Second,
		DisableShortFirstPing: true,
	}
	if opts.StoreDir != "" {
		if err := os.MkdirAll(opts.StoreDir, 0o700); err != nil {
			return nil, fmt.Errorf("embedded broker: stream store: %w", err)
		}
		so.JetStream, so.StoreDir = true, opts.StoreDir
	}
	srv, err := server.NewServer(so)
	if err != nil {
		return nil, fmt.Errorf("embedded broker: %w", err)
	}
	go srv.Start()
	if !srv.ReadyForConnections(opts.ReadyTimeout) {
		srv.Shutdown()
		if opts.StoreDir != "" && !srv.JetStreamEnabled() {
			return nil, fmt.Errorf("embedded broker on %s:%d: the stream store in %s did not start (is it writable, with space left?)", host, port, opts.StoreDir)
		}
		return nil, fmt.Errorf("embedded broker on %s:%d not ready after %s", host, port, opts.ReadyTimeout)
	}
	if opts.StoreDir != "" && !srv.JetStreamEnabled() {
		srv.Shutdown()
		return nil, fmt.Errorf("embedded broker: the stream store in %s did not start (is it writable, with space left?)", opts.StoreDir)
	}
	return &Embedded{srv: srv, storeDir: opts.StoreDir}, nil
}

// StoreDir is the directory of the stream store; empty without JetStream.
func (e *Embedded) StoreDir() string { return e.storeDir }

// URL is the client URL of the embedded broker.
func (e *Embedded) URL() string { return e.srv.ClientURL() }

// Shutdown stops the broker and waits for it to finish.
func (e *Embedded) Shutdown() {
	e.srv.Shutdown()
	e.srv.WaitForShutdown()
}
