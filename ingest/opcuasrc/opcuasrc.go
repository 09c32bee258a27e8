// Package opcuasrc is the OPC UA source of ingest (gopcua v0.9.0). It
// connects to one endpoint with a chosen security policy and mode and a
// user identity, creates one subscription with a monitored item per
// configured NodeId, and turns data-change notifications into samples that
// keep the server's source timestamp and StatusCode.
//
// Lost sessions: gopcua's own reconnect is switched off; Run notices the
// lost connection, closes the client, reconnects with a fixed wait and
// re-creates the subscription and its monitored items. The gap is
// reported: logged, added to the gap metric, and written into the data as
// one bad sample per item (StatusCode BadNoCommunication) at the time the
// link was lost, so the zero-order hold in the windows stops there instead
// of holding the last value across the outage.
//
// Server authentication: with security mode Sign or SignAndEncrypt the
// certificate the server offers on the selected endpoint must be one of
// TrustedServerCertificates (byte for byte), be inside its validity period
// and name the endpoint's application URI, before the secure channel is
// opened (trust.go). A refusal is an *UntrustedServerError
// (errors.Is(err, ErrUntrustedServer)) carrying the SHA-1 and SHA-256
// thumbprints; Run keeps retrying, as after any connection error, and
// counts refusals (TrustStatus, Collector). AcceptAnyServerCertificate
// switches the check off for commissioning and is logged as a warning at
// start and at every connection.
package opcuasrc

import (
	"context"
	"crypto/rand"
	"crypto/rsa"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"math/big"
	"net/url"
	"strings"
	"sync"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/gopcua/opcua"
	"github.com/gopcua/opcua/ua"
)

// Config is the OPC UA source configuration.
type Config struct {
	Endpoint string `yaml:"endpoint"` // opc.tcp://host:4840/path
	// SecurityPolicy: None (default) or Basic256Sha256.
	SecurityPolicy string `yaml:"security_policy"`
	// SecurityMode: None (default), Sign or SignAndEncrypt.
	SecurityMode string `yaml:"security_mode"`
	// Auth: anonymous (default), username or certificate.
	Auth     string `yaml:"auth"`
	User     string `yaml:"user"`
	Password string `yaml:"password"`
	// CertFile/KeyFile: the application instance certificate (PEM or DER)
	// and its RSA key; also the identity for auth: certificate. With a
	// secure policy and no files, an ephemeral self-signed certificate is
	// made at start (the server must be set to trust unknown clients).
	CertFile string `yaml:"cert_file"`
	KeyFile  string `yaml:"key_file"`
	// ApplicationURI of this client; must match the certificate's URI.
	ApplicationURI string `yaml:"application_uri"`
	// TrustedServerCertificates: the server application instance
	// certificates this client trusts, as files (DER or PEM, one or more
	// certificates) or directories (their *.der, *.pem, *.crt and *.cer
	// files, not recursive). Read at start and again at every connection
	// attempt, so a certificate copied into a listed directory is used at
	// the next attempt. Required with security_mode Sign or SignAndEncrypt
	// unless AcceptAnyServerCertificate; refused with security_mode None,
	// where there is no secure channel and the server is not
	// authenticated at all.
	TrustedServerCertificates []string `yaml:"trusted_server_certificates"`
	// AcceptAnyServerCertificate: commissioning only. The server's
	// certificate is not checked, so a man in the middle can pose as the
	// server; logged as a warning at start and at every connection with
	// the thumbprint accepted. Only with security_mode Sign or
	// SignAndEncrypt, and not together with TrustedServerCertificates.
	AcceptAnyServerCertificate bool `yaml:"accept_any_server_certificate"`
	// PublishingInterval of the subscription (default 500 ms).
	PublishingInterval time.Duration `yaml:"publishing_interval"`
	// ReconnectWait between connection attempts (default 2 s).
	ReconnectWait time.Duration `yaml:"reconnect_wait"`
	// RequestTimeout per service call (default 10 s).
	RequestTimeout time.Duration `yaml:"request_timeout"`
	// WatchdogInterval: how often the server's CurrentTime is read to
	// detect a server that stopped answering without closing the TCP
	// connection (default 5 s; a failed read ends the session).
	WatchdogInterval time.Duration `yaml:"watchdog_interval"`
	Items            []ItemConfig  `yaml:"items"`
}

// ItemConfig is one monitored item.
type ItemConfig struct {
	NodeID string `yaml:"node_id"` // ns=2;s=Turbine1.PT101
	Tag    string `yaml:"tag"`     // tag name in the tag map (default: the NodeId text)
	// SamplingInterval requested from the server (default: the publishing
	// interval; 0 in the request means "as fast as practical").
	SamplingInterval time.Duration `yaml:"sampling_interval"`
	QueueSize        uint32        `yaml:"queue_size"` // default 10
	// Deadband for the data-change filter, in the unit the server sends
	// (absolute) or percent of the EU range (percent); 0 = none.
	Deadband     float64 `yaml:"deadband"`
	DeadbandType string  `yaml:"deadband_type"` // absolute (default) or percent
}

// Errors callers branch on.
var (
	ErrConfig = errors.New("invalid opc ua source settings")
	// ErrNoEndpoint: the server offers no endpoint with the requested
	// security policy and mode.
	ErrNoEndpoint = errors.New("no matching opc ua endpoint")
	// ErrTrustSettings (which wraps ErrConfig) is wrapped when
	// trusted_server_certificates and accept_any_server_certificate do
	// not fit the security mode or each other.
	ErrTrustSettings = fmt.Errorf("%w: server certificate trust", ErrConfig)
	errNoItems       = fmt.Errorf("%w: no items", ErrConfig)
)

func (c *Config) defaults() error {
	if c.Endpoint == "" {
		return fmt.Errorf("%w: no endpoint", ErrConfig)
	}
	if c.SecurityPolicy == "" {
		c.SecurityPolicy = "None"
	}
	if c.SecurityMode == "" {
		c.SecurityMode = "None"
	}
	switch c.SecurityPolicy {
	case "None", "Basic256Sha256":
	default:
		return fmt.Errorf("%w: security_policy %q (None, Basic256Sha256)", ErrConfig, c.SecurityPolicy)
	}
	switch c.SecurityMode {
	case "None", "Sign", "SignAndEncrypt":
	default:
		return fmt.Errorf("%w: security_mode %q (None, Sign, SignAndEncrypt)", ErrConfig, c.SecurityMode)
	}
	if (c.SecurityPolicy == "None") != (c.SecurityMode == "None") {
		return fmt.Errorf("%w: security_policy %s does not go with security_mode %s", ErrConfig, c.SecurityPolicy, c.SecurityMode)
	}
	if err := c.checkTrust(); err != nil {
		return err
	}
	switch c.Auth {
	case "", "anonymous":
		c.Auth = "anonymous"
	case "username":
		if c.User == "" {
			return fmt.Errorf("%w: auth username needs user", ErrConfig)
		}
	case "certificate":
		if c.CertFile == "" || c.KeyFile == "" {
			return fmt.Errorf("%w: auth certificate needs cert_file and key_file", ErrConfig)
		}
	default:
		return fmt.Errorf("%w: auth %q (anonymous, username, certificate)", ErrConfig, c.Auth)
	}
	if c.ApplicationURI == "" {
		c.ApplicationURI = "urn:exergywatch:client"
	}
	if c.PublishingInterval == 0 {
		c.PublishingInterval = 500 * time.Millisecond
	}
	if c.ReconnectWait == 0 {
		c.ReconnectWait = 2 * time.Second
	}
	if c.RequestTimeout == 0 {
		c.RequestTimeout = 10 * time.Second
	}
	if c.WatchdogInterval == 0 {
		c.WatchdogInterval = 5 * time.Second
	}
	if len(c.Items) == 0 {
		return errNoItems
	}
	seen := map[string]bool{}
	for i := range c.Items {
		it := &c.Items[i]
		if _, err := ua.ParseNodeID(it.NodeID); err != nil {
			return fmt.Errorf("%w: items[%d] node_id %q: %v", ErrConfig, i, it.NodeID, err)
		}
		if it.Tag == "" {
			it.Tag = it.NodeID
		}
		if seen[it.Tag] {
			return fmt.Errorf("%w: items[%d] tag %q twice", ErrConfig, i, it.Tag)
		}
		seen[it.Tag] = true
		if it.QueueSize == 0 {
			it.QueueSize = 10
		}
		if it.SamplingInterval == 0 {
			it.SamplingInterval = c.PublishingInterval
		}
		switch it.DeadbandType {
		case "", "absolute", "percent":
		default:
			return fmt.Errorf("%w: items[%d] deadband_type %q (absolute, percent)", ErrConfig, i, it.DeadbandType)
		}
		if it.Deadband < 0 || math.IsNaN(it.Deadband) {
			return fmt.Errorf("%w: items[%d] negative deadband", ErrConfig, i)
		}
	}
	return nil
}

// checkTrust applies the rules of TrustedServerCertificates and
// AcceptAnyServerCertificate (see their docs).
func (c *Config) checkTrust() error {
	trusted := len(c.TrustedServerCertificates) > 0
	if c.SecurityMode == "None" {
		if trusted {
			return fmt.Errorf("%w: trusted_server_certificates with security_mode None: without a secure channel the server is not authenticated, so the list would check nothing", ErrTrustSettings)
		}
		if c.AcceptAnyServerCertificate {
			return fmt.Errorf("%w: accept_any_server_certificate with security_mode None: there is no server certificate to accept", ErrTrustSettings)
		}
		return nil
	}
	if trusted && c.AcceptAnyServerCertificate {
		return fmt.Errorf("%w: both trusted_server_certificates and accept_any_server_certificate: choose one", ErrTrustSettings)
	}
	if !trusted && !c.AcceptAnyServerCertificate {
		return fmt.Errorf("%w: security_mode %s needs trusted_server_certificates (the server's certificate files or a directory of them; "+
			"exergywatch browse shows the server's thumbprint), or accept_any_server_certificate: true for commissioning only", ErrTrustSettings, c.SecurityMode)
	}
	for i, p := range c.TrustedServerCertificates {
		if strings.TrimSpace(p) == "" {
			return fmt.Errorf("%w: trusted_server_certificates[%d] is empty", ErrTrustSettings, i)
		}
	}
	return nil
}

// loadTrust reads the trust list; nil with AcceptAnyServerCertificate or
// security mode None.
func (c *Config) loadTrust() (*TrustList, error) {
	if c.SecurityMode == "None" || c.AcceptAnyServerCertificate {
		return nil, nil
	}
	return LoadTrustList(c.TrustedServerCertificates)
}

// Source reads samples from one OPC UA server.
type Source struct {
	cfg     Config
	q       *ingest.Queue
	metrics *ingest.Metrics
	log     *slog.Logger
	clock   ingest.Clock
	limiter *ingest.LogLimiter
	cert    []byte
	key     *rsa.PrivateKey

	mu        sync.Mutex
	sessions  int
	lastGap   time.Duration
	trustStat TrustStatus
	connected chan struct{}
	connOnce  sync.Once
}

// New returns an OPC UA source feeding q. metrics, log and clock may be nil.
func New(cfg Config, q *ingest.Queue, metrics *ingest.Metrics, log *slog.Logger, clock ingest.Clock) (*Source, error) {
	if err := cfg.defaults(); err != nil {
		return nil, err
	}
	if log == nil {
		log = slog.Default()
	}
	if clock == nil {
		clock = ingest.SystemClock{}
	}
	s := &Source{cfg: cfg, q: q, metrics: metrics, log: log.With("source", "opcua", "endpoint", cfg.Endpoint), clock: clock,
		connected: make(chan struct{})}
	s.limiter = ingest.NewLogLimiter(s.log, time.Minute)
	var err error
	s.cert, s.key, err = LoadOrMakeCertificate(cfg.CertFile, cfg.KeyFile, cfg.ApplicationURI, cfg.SecurityPolicy != "None")
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrConfig, err)
	}
	s.trustStat.AcceptAny = cfg.AcceptAnyServerCertificate
	switch tl, err := cfg.loadTrust(); {
	case err != nil:
		return nil, fmt.Errorf("%w: %w", ErrConfig, err)
	case cfg.AcceptAnyServerCertificate:
		s.log.Warn("OPC UA SERVER CERTIFICATE NOT CHECKED (accept_any_server_certificate: true): a man in the middle can pose as the server; "+
			"commissioning only: list the server's certificate in trusted_server_certificates", "security", cfg.SecurityPolicy+"/"+cfg.SecurityMode)
	case tl != nil:
		if tl.Len() == 0 {
			s.log.Warn("trusted_server_certificates holds no certificate: every server will be refused", "entries", cfg.TrustedServerCertificates)
		} else {
			s.log.Info("opc ua server trust list", "certificates", tl.Len(), "sha256", tl.SHA256())
		}
	}
	return s, nil
}

// Connected is closed once the first subscription is up.
func (s *Source) Connected() <-chan struct{} { return s.connected }

// Sessions returns how many sessions with subscriptions were established.
func (s *Source) Sessions() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.sessions
}

// LastGap returns the length of the last reported gap.
func (s *Source) LastGap() time.Duration {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.lastGap
}

// LoadOrMakeCertificate loads a certificate (PEM or DER) and RSA key, or
// makes an ephemeral self-signed one for appURI when make is true and no
// files are given.
func LoadOrMakeCertificate(certFile, keyFile, appURI string, makeOne bool) ([]byte, *rsa.PrivateKey, error) {
	if certFile != "" || keyFile != "" {
		c, err := tls.LoadX509KeyPair(certFile, keyFile)
		if err != nil {
			return nil, nil, fmt.Errorf("certificate: %w", err)
		}
		k, ok := c.PrivateKey.(*rsa.PrivateKey)
		if !ok {
			return nil, nil, errors.New("certificate key is not RSA")
		}
		return c.Certificate[0], k, nil
	}
	if !makeOne {
		return nil, nil, nil
	}
	return SelfSigned(appURI, []string{"localhost", "127.0.0.1"})
}

// SelfSigned makes an RSA-2048 self-signed application instance
// certificate with appURI in the subject alternative names.
func SelfSigned(appURI string, hosts []string) ([]byte, *rsa.PrivateKey, error) {
	key, err := rsa.GenerateKey(rand.Reader, 2048)
	if err != nil {
		return nil, nil, err
	}
	u, err := url.Parse(appURI)
	if err != nil {
		return nil, nil, err
	}
	serial, _ := rand.Int(rand.Reader, new(big.Int).Lsh(big.NewInt(1), 62))
	tmpl := &x509.Certificate{
		SerialNumber: serial, Subject: pkix.Name{CommonName: "exergywatch", Organization: []string{"exergywatch"}},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(2 * 365 * 24 * time.Hour),
		KeyUsage:              x509.KeyUsageDigitalSignature | x509.KeyUsageContentCommitment | x509.KeyUsageKeyEncipherment | x509.KeyUsageDataEncipherment | x509.KeyUsageCertSign,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth, x509.ExtKeyUsageServerAuth},
		BasicConstraintsValid: true, URIs: []*url.URL{u},
	}
	for _, h := range hosts {
		tmpl.DNSNames = append(tmpl.DNSNames, h)
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		return nil, nil, err
	}
	return der, key, nil
}

var policyURIs = map[string]string{"None": ua.SecurityPolicyURINone, "Basic256Sha256": ua.SecurityPolicyURIBasic256Sha256}

// ClientOptions selects the endpoint, verifies the server certificate it
// offers (security mode Sign or SignAndEncrypt; see
// VerifyServerCertificate) and returns the gopcua options for the
// configured security and identity (also used by browse). A refused
// certificate gives an *UntrustedServerError.
func ClientOptions(ctx context.Context, cfg Config, cert []byte, key *rsa.PrivateKey) ([]opcua.Option, error) {
	opts, _, err := clientOptions(ctx, cfg, cert, key)
	return opts, err
}

// clientOptions also returns the server's leaf certificate when security is
// on (checked, or accepted unchecked with AcceptAnyServerCertificate).
func clientOptions(ctx context.Context, cfg Config, cert []byte, key *rsa.PrivateKey) ([]opcua.Option, *x509.Certificate, error) {
	if err := cfg.checkTrust(); err != nil {
		return nil, nil, err
	}
	// The trust list is read before the server is asked, so an unreadable
	// list is reported as such and never as an untrusted server.
	trust, err := cfg.loadTrust()
	if err != nil {
		return nil, nil, err
	}
	ep, err := selectEndpoint(ctx, cfg)
	if err != nil {
		return nil, nil, err
	}
	var leaf *x509.Certificate
	if ep.SecurityMode != ua.MessageSecurityModeNone {
		// Before any secure channel: the certificate checked here is the
		// one SecurityFromEndpoint gives gopcua to encrypt the
		// OpenSecureChannel request with (see trust.go).
		if leaf, err = VerifyServerCertificate(ep, cfg.Endpoint, trust, time.Now()); err != nil {
			return nil, leaf, err
		}
	}
	opts := []opcua.Option{
		opcua.AutoReconnect(false),
		opcua.RequestTimeout(cfg.RequestTimeout),
		opcua.ApplicationURI(cfg.ApplicationURI),
		opcua.ApplicationName("exergywatch"),
		opcua.SessionTimeout(time.Minute),
	}
	if cert != nil {
		opts = append(opts, opcua.Certificate(cert), opcua.PrivateKey(key))
	}
	var tt ua.UserTokenType
	switch cfg.Auth {
	case "username":
		opts = append(opts, opcua.AuthUsername(cfg.User, cfg.Password))
		tt = ua.UserTokenTypeUserName
	case "certificate":
		opts = append(opts, opcua.AuthCertificate(cert), opcua.AuthPrivateKey(key))
		tt = ua.UserTokenTypeCertificate
	default:
		opts = append(opts, opcua.AuthAnonymous())
		tt = ua.UserTokenTypeAnonymous
	}
	opts = append(opts, opcua.SecurityFromEndpoint(ep, tt))
	return opts, leaf, nil
}

// selectEndpoint asks the server for its endpoints (GetEndpoints, on an
// unsecured channel) and picks the one with the configured policy and mode.
func selectEndpoint(ctx context.Context, cfg Config) (*ua.EndpointDescription, error) {
	eps, err := opcua.GetEndpoints(ctx, cfg.Endpoint)
	if err != nil {
		return nil, fmt.Errorf("get endpoints: %w", err)
	}
	mode := ua.MessageSecurityModeFromString(cfg.SecurityMode)
	for _, e := range eps {
		if e.SecurityPolicyURI == policyURIs[cfg.SecurityPolicy] && e.SecurityMode == mode {
			return e, nil
		}
	}
	var offered []string
	for _, e := range eps {
		offered = append(offered, strings.TrimPrefix(e.SecurityPolicyURI, "http://opcfoundation.org/UA/SecurityPolicy#")+"/"+e.SecurityMode.String())
	}
	return nil, fmt.Errorf("%w: want %s/%s, server offers %s", ErrNoEndpoint, cfg.SecurityPolicy, cfg.SecurityMode, strings.Join(offered, ", "))
}

// EndpointCertificate returns, unchecked, what the endpoint with the
// configured (secure) policy and mode says about the server's certificate:
// an *UntrustedServerError with reason NotInTrustList carrying subject,
// thumbprints, validity and the DER bytes. It opens no secure channel and
// trusts nothing; browse uses it to show an engineer the certificate to
// compare with the server's own display before trusting it.
func EndpointCertificate(ctx context.Context, cfg Config) (*UntrustedServerError, error) {
	if cfg.SecurityMode == "" || cfg.SecurityMode == "None" {
		return nil, fmt.Errorf("%w: security_mode None has no server certificate", ErrConfig)
	}
	cfg.AcceptAnyServerCertificate, cfg.TrustedServerCertificates = true, nil
	if err := cfg.defaults(); err != nil && !errors.Is(err, errNoItems) {
		return nil, err
	}
	cctx, cancel := context.WithTimeout(ctx, cfg.RequestTimeout)
	defer cancel()
	ep, err := selectEndpoint(cctx, cfg)
	if err != nil {
		return nil, err
	}
	_, err = VerifyServerCertificate(ep, cfg.Endpoint, &TrustList{}, time.Now())
	var ue *UntrustedServerError
	if !errors.As(err, &ue) {
		return nil, err
	}
	if ue.Reason == CertificateUnreadable {
		return nil, ue
	}
	ue.Detail = "no trust list given: not checked"
	return ue, nil
}

// Run connects, subscribes and delivers samples until ctx ends, reconnecting
// after any loss. It returns nil when ctx ends, or an error wrapping
// ErrConfig/ErrNoEndpoint for problems a retry cannot fix. Authentication
// refusals are retried (a password may be corrected on the server) and
// logged once per minute.
func (s *Source) Run(ctx context.Context) error {
	var lostAt time.Time
	for {
		err := s.session(ctx, &lostAt)
		if ctx.Err() != nil {
			return nil
		}
		if errors.Is(err, ErrNoEndpoint) {
			return err
		}
		var ue *UntrustedServerError
		switch {
		case errors.As(err, &ue):
			s.limiter.Warn(s.clock.Now(), "untrusted", "opc ua server refused: its certificate is not trusted", "reason", ue.Reason.String(),
				"subject", ue.Subject, "sha1", ue.SHA1, "sha256", ue.SHA256, "not_after", ue.NotAfter, "err", err)
		case err != nil:
			s.limiter.Warn(s.clock.Now(), "session", "opc ua session ended", "err", err)
		}
		select {
		case <-ctx.Done():
			return nil
		case <-time.After(s.cfg.ReconnectWait):
		}
	}
}

// Connect selects the endpoint, opens a session with the configured
// security and identity and returns the client. onLost, if not nil, is
// called once when the connection is lost or closed. Refusals keep the
// server's StatusCode in the error chain (errors.Is(err,
// ua.StatusBadUserAccessDenied)).
//
// With security mode Sign or SignAndEncrypt the server certificate is
// verified first (ClientOptions); a refusal is an *UntrustedServerError.
func Connect(ctx context.Context, cfg Config, cert []byte, key *rsa.PrivateKey, onLost func()) (*opcua.Client, error) {
	c, _, err := connect(ctx, cfg, cert, key, onLost)
	return c, err
}

// connect is Connect that also returns the server certificate accepted.
func connect(ctx context.Context, cfg Config, cert []byte, key *rsa.PrivateKey, onLost func()) (*opcua.Client, *x509.Certificate, error) {
	if err := cfg.defaults(); err != nil && !errors.Is(err, errNoItems) {
		return nil, nil, err
	}
	if cert == nil && cfg.SecurityPolicy != "None" {
		var err error
		if cert, key, err = LoadOrMakeCertificate(cfg.CertFile, cfg.KeyFile, cfg.ApplicationURI, true); err != nil {
			return nil, nil, fmt.Errorf("%w: %v", ErrConfig, err)
		}
	}
	cctx, cancel := context.WithTimeout(ctx, cfg.RequestTimeout)
	defer cancel()
	opts, leaf, err := clientOptions(cctx, cfg, cert, key)
	if err != nil {
		return nil, nil, err
	}
	if onLost != nil {
		var once sync.Once
		opts = append(opts, opcua.StateChangedFunc(func(st opcua.ConnState) {
			if st == opcua.Disconnected || st == opcua.Closed {
				once.Do(onLost)
			}
		}))
	}
	c, err := opcua.NewClient(cfg.Endpoint, opts...)
	if err != nil {
		return nil, nil, fmt.Errorf("%w: %v", ErrConfig, err)
	}
	if err := c.Connect(cctx); err != nil {
		return nil, nil, fmt.Errorf("connect: %w", err)
	}
	return c, leaf, nil
}

// session runs one connection: connect, subscribe, deliver until lost.
func (s *Source) session(ctx context.Context, lostAt *time.Time) error {
	lost := make(chan struct{})
	c, leaf, err := connect(ctx, s.cfg, s.cert, s.key, func() { close(lost) })
	s.noteTrust(leaf, err)
	if err != nil {
		return err
	}
	// From here a lost state is a lost session; but Close also sets
	// Closed, so only what happens before our Close counts.
	defer func() {
		cctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		_ = c.Close(cctx)
		cancel()
	}()
	notes := make(chan *opcua.PublishNotificationData, 256)
	sub, err := c.Subscribe(ctx, &opcua.SubscriptionParameters{Interval: s.cfg.PublishingInterval}, notes)
	if err != nil {
		return fmt.Errorf("create subscription: %w", err)
	}
	reqs := make([]*ua.MonitoredItemCreateRequest, len(s.cfg.Items))
	for i, it := range s.cfg.Items {
		id, _ := ua.ParseNodeID(it.NodeID)
		r := opcua.NewMonitoredItemCreateRequestWithDefaults(id, ua.AttributeIDValue, uint32(i))
		r.RequestedParameters.SamplingInterval = float64(it.SamplingInterval) / float64(time.Millisecond)
		r.RequestedParameters.QueueSize = it.QueueSize
		r.RequestedParameters.DiscardOldest = true
		if it.Deadband > 0 {
			dt := ua.DeadbandTypeAbsolute
			if it.DeadbandType == "percent" {
				dt = ua.DeadbandTypePercent
			}
			r.RequestedParameters.Filter = ua.NewExtensionObject(&ua.DataChangeFilter{
				Trigger: ua.DataChangeTriggerStatusValue, DeadbandType: uint32(dt), DeadbandValue: it.Deadband})
		}
		reqs[i] = r
	}
	res, err := sub.Monitor(ctx, ua.TimestampsToReturnBoth, reqs...)
	if err != nil {
		return fmt.Errorf("create monitored items: %w", err)
	}
	okItems := 0
	for i, r := range res.Results {
		if r.StatusCode != ua.StatusOK {
			s.log.Warn("monitored item refused", "node_id", s.cfg.Items[i].NodeID, "tag", s.cfg.Items[i].Tag, "status", r.StatusCode)
			continue
		}
		okItems++
	}
	if okItems == 0 {
		return fmt.Errorf("no monitored item accepted")
	}
	now := s.clock.Now()
	s.mu.Lock()
	s.sessions++
	if !lostAt.IsZero() {
		gap := now.Sub(*lostAt)
		s.lastGap = gap
		if s.metrics != nil {
			s.metrics.Reconnects.Add(1)
			s.metrics.GapNanos.Add(uint64(max(gap, 0)))
		}
		s.log.Warn("opc ua subscription re-created", "gap", gap, "lost_at", *lostAt)
		*lostAt = time.Time{}
	}
	s.mu.Unlock()
	s.connOnce.Do(func() { close(s.connected) })
	s.log.Info("opc ua subscribed", "items", okItems, "security", s.cfg.SecurityPolicy+"/"+s.cfg.SecurityMode, "auth", s.cfg.Auth)

	markLost := func() {
		t := s.clock.Now()
		*lostAt = t
		// One bad sample per item at the moment of loss: the window's
		// zero-order hold ends there.
		batch := make([]ingest.Sample, len(s.cfg.Items))
		for i, it := range s.cfg.Items {
			batch[i] = ingest.Sample{Tag: it.Tag, SourceTime: t, ReceiveTime: t, Value: 0, Quality: ingest.Bad,
				StatusCode: uint32(ua.StatusBadNoCommunication), HasStatus: true}
		}
		s.q.Offer(batch)
	}
	watchdog := make(chan error, 1)
	wctx, wcancel := context.WithCancel(ctx)
	defer wcancel()
	wdone := make(chan struct{})
	defer func() { wcancel(); <-wdone }()
	go func() {
		defer close(wdone)
		s.watchdog(wctx, c, watchdog)
	}()
	for {
		select {
		case <-ctx.Done():
			return nil
		case err := <-watchdog:
			markLost()
			return fmt.Errorf("watchdog: %w", err)
		case <-lost:
			markLost()
			return errors.New("connection lost")
		case n := <-notes:
			if n.Error != nil {
				markLost()
				return fmt.Errorf("publish: %w", n.Error)
			}
			s.handle(n.Value)
		}
	}
}

// watchdog reads Server_ServerStatus_CurrentTime (i=2258) every
// WatchdogInterval and reports the first failure.
func (s *Source) watchdog(ctx context.Context, c *opcua.Client, out chan<- error) {
	t := time.NewTicker(s.cfg.WatchdogInterval)
	defer t.Stop()
	req := &ua.ReadRequest{NodesToRead: []*ua.ReadValueID{{NodeID: ua.NewNumericNodeID(0, 2258), AttributeID: ua.AttributeIDValue}},
		TimestampsToReturn: ua.TimestampsToReturnNeither}
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
		rctx, cancel := context.WithTimeout(ctx, s.cfg.RequestTimeout)
		_, err := c.Read(rctx, req)
		cancel()
		if ctx.Err() != nil {
			return
		}
		if err != nil {
			out <- err
			return
		}
	}
}

func (s *Source) handle(v any) {
	dc, ok := v.(*ua.DataChangeNotification)
	if !ok {
		return // keep-alives, status changes
	}
	now := s.clock.Now()
	batch := make([]ingest.Sample, 0, len(dc.MonitoredItems))
	for _, mi := range dc.MonitoredItems {
		if mi == nil || int(mi.ClientHandle) >= len(s.cfg.Items) || mi.Value == nil {
			continue
		}
		it := &s.cfg.Items[mi.ClientHandle]
		dv := mi.Value
		smp := ingest.Sample{Tag: it.Tag, SourceTime: dv.SourceTimestamp, ReceiveTime: now}
		if dv.SourceTimestamp.IsZero() && !dv.ServerTimestamp.IsZero() {
			smp.SourceTime = dv.ServerTimestamp
		}
		code := uint32(ua.StatusOK)
		if dv.EncodingMask&ua.DataValueStatusCode != 0 {
			code = uint32(dv.Status)
		}
		smp.StatusCode, smp.HasStatus = code, true
		smp.Quality = ingest.QualityFromStatus(code)
		f, err := Float(dv.Value)
		if err != nil {
			if smp.Quality != ingest.Bad || dv.Value != nil {
				if s.metrics != nil {
					s.metrics.DecodeErrors.Add(1)
					s.metrics.Count(ingest.ReasonDecode, 1)
				}
				s.limiter.Warn(now, it.Tag, "opc ua value not numeric", "tag", it.Tag, "node_id", it.NodeID, "err", err)
				continue
			}
			// A bad status without a value still marks a gap.
		}
		smp.Value = f
		batch = append(batch, smp)
	}
	if s.metrics != nil {
		s.metrics.Messages.Add(1)
	}
	if len(batch) > 0 {
		s.q.Offer(batch)
	}
}

// ErrNotNumeric is returned by Float for values that are not numbers.
var ErrNotNumeric = errors.New("value is not a number")

// Float converts a scalar numeric or boolean variant to float64.
func Float(v *ua.Variant) (float64, error) {
	if v == nil {
		return 0, fmt.Errorf("%w: no value", ErrNotNumeric)
	}
	switch x := v.Value().(type) {
	case float64:
		return x, nil
	case float32:
		return float64(x), nil
	case int8:
		return float64(x), nil
	case int16:
		return float64(x), nil
	case int32:
		return float64(x), nil
	case int64:
		return float64(x), nil
	case uint8:
		return float64(x), nil
	case uint16:
		return float64(x), nil
	case uint32:
		return float64(x), nil
	case uint64:
		return float64(x), nil
	case bool:
		if x {
			return 1, nil
		}
		return 0, nil
	}
	return 0, fmt.Errorf("%w: %s", ErrNotNumeric, v.Type())
}

// Validate checks the settings as New will, without connecting (for
// `exergywatch check`).
func (c Config) Validate() error { return c.defaults() }
