package opcuasrc

import (
	"crypto/x509"
	"errors"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// TrustStatus is what the source knows about the server's certificate, for
// /status and metrics.
type TrustStatus struct {
	// AcceptAny is true when the certificate is not checked
	// (accept_any_server_certificate).
	AcceptAny bool `json:"accept_any_server_certificate"`
	// Refusals counts connection attempts refused because of the server's
	// certificate (any UntrustReason).
	Refusals uint64 `json:"untrusted_server_refusals"`
	// LastRefusal is the latest refusal; nil once a connection with an
	// accepted certificate follows it.
	LastRefusal *UntrustedServerError `json:"-"`
	// ServerSHA256 and ServerNotAfter describe the certificate of the last
	// accepted secure connection (empty / zero without security).
	ServerSHA256   string    `json:"server_certificate_sha256,omitempty"`
	ServerNotAfter time.Time `json:"server_certificate_not_after,omitzero"`
}

// TrustStatus returns a copy of the certificate status.
func (s *Source) TrustStatus() TrustStatus {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.trustStat
}

// expiryWarning is how long before NotAfter an accepted server
// certificate is reported as expiring (common practice, no source).
const expiryWarning = 30 * 24 * time.Hour

// noteTrust records the outcome of one connection attempt's certificate
// check and logs what was accepted.
func (s *Source) noteTrust(leaf *x509.Certificate, err error) {
	var ue *UntrustedServerError
	s.mu.Lock()
	defer s.mu.Unlock()
	if errors.As(err, &ue) {
		s.trustStat.Refusals++
		s.trustStat.LastRefusal = ue
		return
	}
	if leaf == nil || err != nil {
		return
	}
	_, sum := Thumbprints(leaf.Raw)
	first := sum != s.trustStat.ServerSHA256
	s.trustStat.LastRefusal = nil
	s.trustStat.ServerSHA256, s.trustStat.ServerNotAfter = sum, leaf.NotAfter
	now := time.Now()
	switch {
	case s.cfg.AcceptAnyServerCertificate:
		s.log.Warn("opc ua server certificate accepted WITHOUT CHECK (accept_any_server_certificate)", "subject", leaf.Subject.String(),
			"sha256", sum, "not_after", leaf.NotAfter)
	case first:
		s.log.Info("opc ua server certificate trusted", "subject", leaf.Subject.String(), "sha256", sum, "not_after", leaf.NotAfter)
	}
	if left := leaf.NotAfter.Sub(now); left < expiryWarning {
		s.limiter.Warn(now, "expiring", "opc ua server certificate expires soon; the connection will be refused after that",
			"not_after", leaf.NotAfter, "left", left.Round(time.Hour), "sha256", sum)
	}
}

var (
	descRefusals = prometheus.NewDesc("exergywatch_opcua_untrusted_server_refusals_total",
		"Connection attempts refused because the OPC UA server's certificate was not trusted, expired or did not fit the endpoint.",
		[]string{"endpoint"}, nil)
	descNotAfter = prometheus.NewDesc("exergywatch_opcua_server_certificate_not_after_seconds",
		"End of validity (Unix time) of the certificate of the last accepted secure OPC UA connection.", []string{"endpoint"}, nil)
	descAcceptAny = prometheus.NewDesc("exergywatch_opcua_server_certificate_unchecked",
		"1 when accept_any_server_certificate is set (the server is not authenticated).", []string{"endpoint"}, nil)
)

type trustCollector struct{ s *Source }

// Collector exposes TrustStatus as Prometheus metrics (label endpoint); the
// daemon registers it beside the ingest metrics.
func (s *Source) Collector() prometheus.Collector { return trustCollector{s} }

func (c trustCollector) Describe(ch chan<- *prometheus.Desc) {
	ch <- descRefusals
	ch <- descNotAfter
	ch <- descAcceptAny
}

func (c trustCollector) Collect(ch chan<- prometheus.Metric) {
	st := c.s.TrustStatus()
	ep := c.s.cfg.Endpoint
	ch <- prometheus.MustNewConstMetric(descRefusals, prometheus.CounterValue, float64(st.Refusals), ep)
	if !st.ServerNotAfter.IsZero() {
		ch <- prometheus.MustNewConstMetric(descNotAfter, prometheus.GaugeValue, float64(st.ServerNotAfter.Unix()), ep)
	}
	v := 0.0
	if st.AcceptAny {
		v = 1
	}
	ch <- prometheus.MustNewConstMetric(descAcceptAny, prometheus.GaugeValue, v, ep)
}
