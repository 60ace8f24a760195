package storetest

import (
	"io"
	"net"
	"net/url"
	"sync"
	"testing"
)

// CutProxy is a TCP proxy in front of the test PostgreSQL server that a
// test can cut, to see what the code does when the database goes away
// abruptly: Cut closes every proxied connection at once (clients see their
// connection reset or cut short in the middle of whatever they were doing)
// and refuses new ones until Restore.
type CutProxy struct {
	ln     net.Listener
	target string

	mu    sync.Mutex
	cut   bool
	conns map[net.Conn]struct{}
}

// NewCutProxy starts a proxy to the server of the PostgreSQL URL u (made
// by URL) and returns it with the URL that goes through it. It is closed
// when the test ends.
func NewCutProxy(t testing.TB, u string) (*CutProxy, string) {
	t.Helper()
	parsed, err := url.Parse(u)
	if err != nil {
		t.Fatalf("parse %s: %v", u, err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatalf("proxy listen: %v", err)
	}
	p := &CutProxy{ln: ln, target: parsed.Host, conns: map[net.Conn]struct{}{}}
	go p.accept()
	t.Cleanup(func() {
		ln.Close()
		p.Cut()
	})
	parsed.Host = ln.Addr().String()
	return p, parsed.String()
}

func (p *CutProxy) accept() {
	for {
		c, err := p.ln.Accept()
		if err != nil {
			return
		}
		go p.serve(c)
	}
}

// serve pipes one client connection to the server, unless the proxy is
// cut.
func (p *CutProxy) serve(client net.Conn) {
	p.mu.Lock()
	if p.cut {
		p.mu.Unlock()
		client.Close()
		return
	}
	p.mu.Unlock()
	server, err := net.Dial("tcp", p.target)
	if err != nil {
		client.Close()
		return
	}
	p.mu.Lock()
	if p.cut {
		p.mu.Unlock()
		client.Close()
		server.Close()
		return
	}
	p.conns[client], p.conns[server] = struct{}{}, struct{}{}
	p.mu.Unlock()
	done := make(chan struct{}, 2)
	pipe := func(dst, src net.Conn) {
		_, _ = io.Copy(dst, src)
		done <- struct{}{}
	}
	go pipe(server, client)
	go pipe(client, server)
	<-done
	client.Close()
	server.Close()
	<-done
	p.mu.Lock()
	delete(p.conns, client)
	delete(p.conns, server)
	p.mu.Unlock()
}

// Cut closes every connection through the proxy and refuses new ones.
func (p *CutProxy) Cut() {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.cut = true
	for c := range p.conns {
		c.Close()
	}
}

// Restore lets new connections through again.
func (p *CutProxy) Restore() {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.cut = false
}
