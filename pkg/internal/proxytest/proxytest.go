// Package proxytest is a TCP proxy for tests of what crosses a network: it
// forwards connections to a target and can freeze them (drop every byte,
// close nothing), cut them (close them and refuse new ones until it
// reopens), or cut its client off at a given point of what it sends.
package proxytest

import (
	"bytes"
	"net"
	"sync"
	"sync/atomic"
	"testing"

	"github.com/stretchr/testify/require"
)

// Proxy forwards TCP connections from its own loopback port to a target.
type Proxy struct {
	ln     net.Listener
	target string
	frozen atomic.Bool

	mu       sync.Mutex
	marker   []byte        // cut at the first read from the client holding it
	cut      chan struct{} // closed when that cut is made
	refusing bool
	conns    map[net.Conn]bool
}

// Start runs a proxy to target (host:port) for the test's lifetime.
func Start(t testing.TB, target string) *Proxy {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	p := &Proxy{ln: ln, target: target, conns: map[net.Conn]bool{}}
	t.Cleanup(func() { ln.Close(); p.Cut() })
	go p.serve()
	return p
}

// NATSURL is the proxy's address as a NATS URL.
func (p *Proxy) NATSURL() string { return "nats://" + p.ln.Addr().String() }

// Freeze drops every byte both ways while on, closing nothing, so that
// neither end learns the other has stopped answering.
func (p *Proxy) Freeze(on bool) { p.frozen.Store(on) }

// CutAt makes the proxy close the client's connection at the first read
// from it that holds marker, without forwarding that read, and refuse
// connections from then on until Reopen. The channel is closed once the
// cut is made.
func (p *Proxy) CutAt(marker []byte) <-chan struct{} {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.marker, p.cut = marker, make(chan struct{})
	return p.cut
}

// Cut closes every connection now and refuses new ones until Reopen.
func (p *Proxy) Cut() {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.refusing = true
	for c := range p.conns {
		c.Close()
	}
	clear(p.conns)
}

// Reopen lets connections through again.
func (p *Proxy) Reopen() {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.refusing = false
}

// cutting reports whether the client is to be cut off at data, and if so
// makes the cut known and starts refusing.
func (p *Proxy) cutting(data []byte) bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.marker == nil || !bytes.Contains(data, p.marker) {
		return false
	}
	p.marker, p.refusing = nil, true
	close(p.cut)
	return true
}

// admit keeps a new client connection unless the proxy is refusing.
func (p *Proxy) admit(c net.Conn) bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.refusing {
		return false
	}
	p.conns[c] = true
	return true
}

func (p *Proxy) forget(c net.Conn) {
	p.mu.Lock()
	defer p.mu.Unlock()
	delete(p.conns, c)
}

func (p *Proxy) serve() {
	for {
		client, err := p.ln.Accept()
		if err != nil {
			return
		}
		if !p.admit(client) {
			client.Close()
			continue
		}
		server, err := net.Dial("tcp", p.target)
		if err != nil {
			p.forget(client)
			client.Close()
			continue
		}
		go p.pump(server, client, true)
		go p.pump(client, server, false)
	}
}

// pump copies src to dst, dropping what it reads while frozen, and closes
// both when either fails or, from the client (fromClient), when a read
// holds the marker to cut at. The marker is looked for in each read with
// the end of the one before, in case it is split between the two.
func (p *Proxy) pump(dst, src net.Conn, fromClient bool) {
	defer dst.Close()
	defer src.Close()
	if fromClient {
		defer p.forget(src)
	}
	buf := make([]byte, 32<<10)
	var prev []byte
	for {
		n, err := src.Read(buf)
		if err != nil {
			return
		}
		if p.frozen.Load() {
			continue
		}
		if fromClient {
			seen := append(prev, buf[:n]...)
			if p.cutting(seen) {
				return
			}
			prev = bytes.Clone(seen[max(0, len(seen)-64):])
		}
		if _, err := dst.Write(buf[:n]); err != nil {
			return
		}
	}
}
