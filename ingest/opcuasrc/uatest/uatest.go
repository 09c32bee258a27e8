// Package uatest runs gopcua's in-process OPC UA server (package
// github.com/gopcua/opcua/server, v0.9.0) for tests: a namespace "plant"
// with numeric variables whose value, source timestamp and StatusCode the
// test sets, and which can be stopped and restarted on the same port.
// Only tests import it. StartSecure adds Basic256Sha256 Sign and
// SignAndEncrypt endpoints with a given application instance certificate,
// for the client's server certificate checks. gopcua's server does not
// check user identities, so authentication is tested against node-opcua
// instead (testdata/opcua-peer).
package uatest

import (
	"context"
	"crypto/rsa"
	"fmt"
	"net"
	"sync"
	"testing"
	"time"

	"github.com/gopcua/opcua/id"
	"github.com/gopcua/opcua/server"
	"github.com/gopcua/opcua/ua"
)

// Server is a running in-process OPC UA server.
type Server struct {
	t      testing.TB
	Port   int
	names  []string
	mu     sync.Mutex
	vals   map[string]*ua.DataValue
	srv    *server.Server
	ns     *server.NodeNameSpace
	cancel context.CancelFunc
	wg     sync.WaitGroup // background Close calls
	cert   []byte         // DER; nil: None endpoint only
	key    *rsa.PrivateKey
}

// Endpoint returns opc.tcp://127.0.0.1:<port>.
func (s *Server) Endpoint() string { return fmt.Sprintf("opc.tcp://127.0.0.1:%d", s.Port) }

type quiet struct{}

func (quiet) Debug(string, ...any) {}
func (quiet) Info(string, ...any)  {}
func (quiet) Warn(string, ...any)  {}
func (quiet) Error(string, ...any) {}

// Start starts a server on a free port with variables ns=<plant>;s=<name>
// for each name, initial value 0 (Double).
func Start(t testing.TB, names ...string) *Server {
	t.Helper()
	return start(t, nil, nil, names)
}

// StartSecure is Start with the application instance certificate cert
// (DER; its first URI becomes the server's application URI, as gopcua's
// server.Certificate does) and key, offering Basic256Sha256 with Sign and
// with SignAndEncrypt besides None. Anonymous identity only.
func StartSecure(t testing.TB, cert []byte, key *rsa.PrivateKey, names ...string) *Server {
	t.Helper()
	return start(t, cert, key, names)
}

func start(t testing.TB, cert []byte, key *rsa.PrivateKey, names []string) *Server {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	s := &Server{t: t, Port: port, names: names, vals: map[string]*ua.DataValue{}, cert: cert, key: key}
	for _, n := range names {
		s.vals[n] = &ua.DataValue{EncodingMask: ua.DataValueValue | ua.DataValueSourceTimestamp | ua.DataValueStatusCode,
			Value: ua.MustVariant(0.0), SourceTimestamp: time.Now(), Status: ua.StatusOK}
	}
	s.start()
	t.Cleanup(func() { s.Stop(); s.wg.Wait() })
	return s
}

func (s *Server) start() {
	s.t.Helper()
	opts := []server.Option{
		server.EnableSecurity("None", ua.MessageSecurityModeNone),
		server.EnableAuthMode(ua.UserTokenTypeAnonymous),
		server.EndPoint("127.0.0.1", s.Port),
		server.SetLogger(quiet{}),
	}
	if s.cert != nil {
		opts = append(opts,
			server.Certificate(s.cert), server.PrivateKey(s.key),
			server.EnableSecurity("Basic256Sha256", ua.MessageSecurityModeSign),
			server.EnableSecurity("Basic256Sha256", ua.MessageSecurityModeSignAndEncrypt))
	}
	srv := server.New(opts...)
	ctx, cancel := context.WithCancel(context.Background())
	if err := srv.Start(ctx); err != nil {
		cancel()
		s.t.Fatalf("opc ua server: %v", err)
	}
	ns := server.NewNodeNameSpace(srv, "plant")
	root, _ := srv.Namespace(0)
	root.Objects().AddRef(ns.Objects(), id.HasComponent, true)
	for _, name := range s.names {
		name := name
		n := server.NewVariableNode(ua.NewStringNodeID(ns.ID(), name), name, func() *ua.DataValue {
			s.mu.Lock()
			defer s.mu.Unlock()
			dv := *s.vals[name]
			return &dv
		})
		ns.AddNode(n)
		ns.Objects().AddRef(n, id.HasComponent, true)
	}
	s.mu.Lock()
	s.srv, s.ns, s.cancel = srv, ns, cancel
	s.mu.Unlock()
}

// NodeID returns the NodeId text of a variable.
func (s *Server) NodeID(name string) string {
	return ua.NewStringNodeID(s.ns.ID(), name).String()
}

// Set changes a variable and notifies the subscribers.
func (s *Server) Set(name string, v any, ts time.Time, status ua.StatusCode) {
	s.mu.Lock()
	s.vals[name] = &ua.DataValue{EncodingMask: ua.DataValueValue | ua.DataValueSourceTimestamp | ua.DataValueStatusCode,
		Value: ua.MustVariant(v), SourceTimestamp: ts, Status: status}
	srv, ns := s.srv, s.ns
	s.mu.Unlock()
	if srv != nil {
		srv.ChangeNotification(ua.NewStringNodeID(ns.ID(), name))
	}
}

// Stop closes the server's listener and secure channels. gopcua's
// Server.Close leaves the TCP connections open and then waits up to 10 s
// for their goroutines; that wait runs in the background (the test cleanup
// waits for it), so Stop returns once the port is free. Clients notice the
// dead server by their own timeouts, as with a hung server process.
func (s *Server) Stop() {
	s.mu.Lock()
	srv, cancel := s.srv, s.cancel
	s.srv = nil
	s.mu.Unlock()
	if srv == nil {
		return
	}
	s.wg.Add(1)
	go func() {
		defer s.wg.Done()
		_ = srv.Close()
		cancel()
	}()
	for i := 0; i < 200; i++ { // wait until the port can be bound again
		l, err := net.Listen("tcp", fmt.Sprintf("127.0.0.1:%d", s.Port))
		if err == nil {
			l.Close()
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// Restart stops the server and starts a new one on the same port (a
// server process restart: all sessions and subscriptions are gone).
func (s *Server) Restart() {
	s.Stop()
	s.start()
}
