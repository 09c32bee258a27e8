package opcuasrc

// Verification of the server's application instance certificate.
//
// The check pins certificates: the leaf certificate the server offers on
// the selected endpoint (GetEndpoints, EndpointDescription.ServerCertificate)
// must be byte for byte one of the certificates in the trust list, lie in
// its validity period, and name the endpoint's application URI among its
// URI subject alternative names (OPC UA Part 4, 6.1.3 asks the client to
// compare them). Issuer chains are not followed: a server whose
// certificate was issued by a CA is trusted by listing the server's own
// certificate, not the CA.
//
// Why checking the endpoint's certificate before the secure channel is
// enough: gopcua encrypts the OpenSecureChannel request, which carries the
// client nonce, with the public key of exactly that certificate
// (SecurityFromEndpoint sets it as the channel's remote certificate), and
// the symmetric keys of the channel are derived from that nonce (OPC UA
// Part 6, 6.7.5). Only the holder of the trusted certificate's private key
// can read the nonce, so a man in the middle that answers with a
// certificate of its own cannot sign or decrypt anything after the
// OpenSecureChannel exchange and the session fails.

import (
	"bytes"
	"crypto/sha1"
	"crypto/sha256"
	"crypto/x509"
	"encoding/hex"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/gopcua/opcua/ua"
)

// Errors of the server certificate check.
var (
	// ErrUntrustedServer is wrapped (via *UntrustedServerError) when the
	// server's certificate is not in the trust list, is outside its
	// validity period, does not name the endpoint's application URI, or
	// cannot be read.
	ErrUntrustedServer = errors.New("opc ua server certificate not trusted")
	// ErrTrustList is wrapped when an entry of trusted_server_certificates
	// cannot be read or holds no certificate.
	ErrTrustList = errors.New("opc ua server trust list")
)

// UntrustReason says why a server certificate was refused.
type UntrustReason int

// Reasons for refusing a server certificate.
const (
	NotInTrustList         UntrustReason = iota // not byte for byte in the trust list
	CertificateExpired                          // now is after NotAfter
	CertificateNotYetValid                      // now is before NotBefore
	ApplicationURIMismatch                      // endpoint's application URI not among the certificate's URIs
	CertificateUnreadable                       // missing or not an X.509 certificate
)

func (r UntrustReason) String() string {
	switch r {
	case NotInTrustList:
		return "not in the trust list"
	case CertificateExpired:
		return "expired"
	case CertificateNotYetValid:
		return "not yet valid"
	case ApplicationURIMismatch:
		return "application URI mismatch"
	case CertificateUnreadable:
		return "unreadable"
	}
	return fmt.Sprintf("UntrustReason(%d)", int(r))
}

// UntrustedServerError describes a refused server certificate, with what an
// engineer needs to decide whether to trust it. errors.Is(err,
// ErrUntrustedServer) is true for it.
type UntrustedServerError struct {
	Endpoint string        // endpoint URL asked for
	Reason   UntrustReason // why it was refused
	Detail   string        // for people: what exactly did not fit
	// Certificate is the server's leaf certificate, DER (nil when
	// unreadable); browse can save it for the trust list.
	Certificate []byte
	Subject     string    // RFC 2253 form
	SHA1        string    // thumbprint, upper-case hex (as OPC UA tools show it)
	SHA256      string    // thumbprint, upper-case hex
	NotBefore   time.Time // validity period of the certificate
	NotAfter    time.Time
	// ApplicationURIs are the certificate's URI subject alternative names;
	// EndpointApplicationURI is what the endpoint description says.
	ApplicationURIs        []string
	EndpointApplicationURI string
}

func (e *UntrustedServerError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%v: %s: certificate %s", ErrUntrustedServer, e.Endpoint, e.Reason)
	if e.Detail != "" {
		fmt.Fprintf(&b, " (%s)", e.Detail)
	}
	if e.Certificate != nil {
		fmt.Fprintf(&b, "; subject %q, SHA-1 thumbprint %s, SHA-256 thumbprint %s, valid %s to %s",
			e.Subject, e.SHA1, e.SHA256, e.NotBefore.UTC().Format(time.RFC3339), e.NotAfter.UTC().Format(time.RFC3339))
	}
	switch e.Reason {
	case NotInTrustList:
		b.WriteString("; if the thumbprint equals the one the server itself shows for its certificate, add the certificate file (DER or PEM) " +
			"to trusted_server_certificates (exergywatch browse --save-server-certificate FILE saves it)")
	case CertificateExpired, CertificateNotYetValid:
		b.WriteString("; renew the server's application instance certificate and trust the new one")
	case ApplicationURIMismatch:
		b.WriteString("; the server's certificate does not belong to the application at this endpoint")
	}
	return b.String()
}

// Is makes errors.Is(err, ErrUntrustedServer) true.
func (e *UntrustedServerError) Is(target error) bool { return target == ErrUntrustedServer }

// Thumbprints returns the SHA-1 and SHA-256 thumbprints of a DER
// certificate in upper-case hex.
func Thumbprints(der []byte) (sha1Hex, sha256Hex string) {
	s1 := sha1.Sum(der)
	s2 := sha256.Sum256(der)
	return strings.ToUpper(hex.EncodeToString(s1[:])), strings.ToUpper(hex.EncodeToString(s2[:]))
}

// maxCertFile bounds what is read from one trust list file.
const maxCertFile = 1 << 20

// ParseCertificates decodes a certificate file: PEM with one or more
// CERTIFICATE blocks (other text around them is ignored), or DER (one
// certificate or several concatenated). A PEM file holding a private key is
// refused: a trust list needs only certificates, and a key there is a key
// out of place.
func ParseCertificates(data []byte) ([]*x509.Certificate, error) {
	if len(data) == 0 {
		return nil, errors.New("empty file")
	}
	if len(data) > maxCertFile {
		return nil, fmt.Errorf("file larger than %d bytes", maxCertFile)
	}
	if bytes.Contains(data, []byte("-----BEGIN")) {
		var out []*x509.Certificate
		rest := data
		for {
			var blk *pem.Block
			blk, rest = pem.Decode(rest)
			if blk == nil {
				break
			}
			switch {
			case blk.Type == "CERTIFICATE":
				cs, err := x509.ParseCertificates(blk.Bytes)
				if err != nil {
					return nil, fmt.Errorf("PEM certificate %d: %w", len(out)+1, err)
				}
				out = append(out, cs...)
			case strings.Contains(blk.Type, "PRIVATE KEY"):
				return nil, fmt.Errorf("the file holds a private key (%s); a trust list needs only certificates", blk.Type)
			}
		}
		if len(out) == 0 {
			return nil, errors.New("no CERTIFICATE block in the PEM text")
		}
		return out, nil
	}
	cs, err := x509.ParseCertificates(data)
	if err != nil {
		return nil, fmt.Errorf("neither PEM nor a DER certificate: %w", err)
	}
	if len(cs) == 0 {
		return nil, errors.New("no certificate")
	}
	return cs, nil
}

// certExts are the file endings read from a trust list directory.
var certExts = map[string]bool{".der": true, ".pem": true, ".crt": true, ".cer": true}

// LoadTrustEntry reads one entry of trusted_server_certificates: a file
// (DER or PEM) or a directory, of which every regular file ending in .der,
// .pem, .crt or .cer is read (not recursive; other files are ignored, so a
// README may sit there). An empty directory gives no certificates and no
// error: every server is then refused. Errors wrap ErrTrustList.
func LoadTrustEntry(path string) ([]*x509.Certificate, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrTrustList, err)
	}
	if !st.IsDir() {
		return loadCertFile(path)
	}
	ents, err := os.ReadDir(path)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrTrustList, err)
	}
	var out []*x509.Certificate
	for _, e := range ents {
		if !certExts[strings.ToLower(filepath.Ext(e.Name()))] {
			continue
		}
		p := filepath.Join(path, e.Name())
		if fi, err := os.Stat(p); err != nil || !fi.Mode().IsRegular() {
			continue
		}
		cs, err := loadCertFile(p)
		if err != nil {
			return nil, err
		}
		out = append(out, cs...)
	}
	return out, nil
}

func loadCertFile(path string) ([]*x509.Certificate, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrTrustList, err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxCertFile+1))
	if err != nil {
		return nil, fmt.Errorf("%w: %s: %w", ErrTrustList, path, err)
	}
	cs, err := ParseCertificates(data)
	if err != nil {
		return nil, fmt.Errorf("%w: %s: %w", ErrTrustList, path, err)
	}
	return cs, nil
}

// TrustList is a set of trusted server certificates, keyed by the SHA-256
// of their DER bytes.
type TrustList struct {
	certs map[[32]byte]*x509.Certificate
}

// LoadTrustList reads every entry (see LoadTrustEntry).
func LoadTrustList(paths []string) (*TrustList, error) {
	tl := &TrustList{certs: map[[32]byte]*x509.Certificate{}}
	for _, p := range paths {
		cs, err := LoadTrustEntry(p)
		if err != nil {
			return nil, err
		}
		for _, c := range cs {
			tl.certs[sha256.Sum256(c.Raw)] = c
		}
	}
	return tl, nil
}

// Len is the number of distinct trusted certificates.
func (t *TrustList) Len() int {
	if t == nil {
		return 0
	}
	return len(t.certs)
}

// SHA256 lists the thumbprints of the trusted certificates (upper-case hex,
// sorted), for logs.
func (t *TrustList) SHA256() []string {
	var out []string
	if t != nil {
		for k := range t.certs {
			out = append(out, strings.ToUpper(hex.EncodeToString(k[:])))
		}
	}
	sort.Strings(out)
	return out
}

// VerifyServerCertificate checks the certificate an endpoint offers. With
// a nil trust list (accept any) only readability is checked and the leaf is
// returned, so callers can log what they accepted. now is the wall-clock
// time the validity period is compared with.
func VerifyServerCertificate(ep *ua.EndpointDescription, endpoint string, trust *TrustList, now time.Time) (*x509.Certificate, error) {
	e := &UntrustedServerError{Endpoint: endpoint}
	if ep != nil && ep.Server != nil {
		e.EndpointApplicationURI = ep.Server.ApplicationURI
	}
	if ep == nil || len(ep.ServerCertificate) == 0 {
		e.Reason, e.Detail = CertificateUnreadable, "the endpoint offers no server certificate"
		return nil, e
	}
	// ServerCertificate may be the leaf followed by its issuers (OPC UA
	// Part 6, 6.2.3); the first is the server's own.
	chain, err := x509.ParseCertificates(ep.ServerCertificate)
	if err != nil || len(chain) == 0 {
		e.Reason, e.Detail = CertificateUnreadable, fmt.Sprintf("not an X.509 certificate: %v", err)
		return nil, e
	}
	leaf := chain[0]
	e.Certificate = leaf.Raw
	e.Subject = leaf.Subject.String()
	e.SHA1, e.SHA256 = Thumbprints(leaf.Raw)
	e.NotBefore, e.NotAfter = leaf.NotBefore, leaf.NotAfter
	for _, u := range leaf.URIs {
		e.ApplicationURIs = append(e.ApplicationURIs, u.String())
	}
	if trust == nil {
		return leaf, nil
	}
	if _, ok := trust.certs[sha256.Sum256(leaf.Raw)]; !ok {
		e.Reason = NotInTrustList
		e.Detail = fmt.Sprintf("%d trusted certificates", trust.Len())
		return leaf, e
	}
	if now.Before(leaf.NotBefore) {
		e.Reason, e.Detail = CertificateNotYetValid, "valid from "+leaf.NotBefore.UTC().Format(time.RFC3339)
		return leaf, e
	}
	if now.After(leaf.NotAfter) {
		e.Reason, e.Detail = CertificateExpired, "expired "+leaf.NotAfter.UTC().Format(time.RFC3339)
		return leaf, e
	}
	if e.EndpointApplicationURI != "" {
		found := false
		for _, u := range e.ApplicationURIs {
			if u == e.EndpointApplicationURI {
				found = true
			}
		}
		if !found {
			e.Reason = ApplicationURIMismatch
			e.Detail = fmt.Sprintf("endpoint says %q, certificate names %q", e.EndpointApplicationURI, e.ApplicationURIs)
			return leaf, e
		}
	}
	return leaf, nil
}
