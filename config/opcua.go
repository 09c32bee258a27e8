package config

import (
	"errors"
	"fmt"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"gopkg.in/yaml.v3"
)

// trustHint says how to fill the server certificate trust list.
const trustHint = "list the server's certificate files (DER or PEM) or a directory of them in trusted_server_certificates; " +
	"`exergywatch browse` prints the server's thumbprint and --save-server-certificate saves the certificate"

// checkOPCUATrust checks trusted_server_certificates and
// accept_any_server_certificate of one OPC UA source: the rules of
// opcuasrc (which key goes with which security mode), and that every
// listed file or directory can be read and holds only certificates.
// Relative entries are taken from the configuration file's directory and
// replaced by that absolute path, so the source reads what was checked. Problems
// carry the line and column of the key or list entry. It reports whether
// the trust settings were wrong (so that the source's own validation,
// which would repeat the message, is skipped).
func (cfg *Config) checkOPCUATrust(c *checker, item string, o *opcuasrc.Config) bool {
	for i, p := range o.TrustedServerCertificates {
		if strings.TrimSpace(p) == "" || filepath.IsAbs(p) || cfg.File == "" {
			continue
		}
		p = filepath.Join(filepath.Dir(cfg.File), p)
		if abs, err := filepath.Abs(p); err == nil {
			p = abs // independent of a later change of working directory
		}
		o.TrustedServerCertificates[i] = p
	}
	// The source's validation applies the rules; here they get a position.
	if err := o.Validate(); errors.Is(err, opcuasrc.ErrTrustSettings) {
		key := "security_mode"
		switch {
		case o.AcceptAnyServerCertificate:
			key = "accept_any_server_certificate"
		case len(o.TrustedServerCertificates) > 0:
			key = "trusted_server_certificates"
		}
		msg := strings.TrimPrefix(err.Error(), opcuasrc.ErrTrustSettings.Error()+": ")
		hint := trustHint
		switch {
		case o.SecurityMode == "" || o.SecurityMode == "None":
			hint = "remove the key, or use security_policy Basic256Sha256 with security_mode SignAndEncrypt"
		case o.AcceptAnyServerCertificate && len(o.TrustedServerCertificates) > 0:
			hint = "keep trusted_server_certificates and remove accept_any_server_certificate"
		}
		cfg.addNode(c, item+"."+key, msg, hint)
		return true
	}
	if o.AcceptAnyServerCertificate || o.SecurityMode == "" || o.SecurityMode == "None" {
		return false
	}
	for i, p := range o.TrustedServerCertificates {
		if _, err := opcuasrc.LoadTrustEntry(p); err != nil {
			cfg.addNode(c, fmt.Sprintf("%s.trusted_server_certificates[%d]", item, i),
				strings.TrimPrefix(err.Error(), opcuasrc.ErrTrustList.Error()+": "),
				"give the path of the server's certificate file (DER or PEM) or of a directory of them; relative paths start at the configuration file's directory")
		}
	}
	return false
}

// addNode adds a problem placed at the YAML node of item (a dotted path
// as in Problem.Item) when the file's text is at hand.
func (cfg *Config) addNode(c *checker, item, msg, hint string) {
	p := &Problem{Item: item, Msg: msg, Hint: hint}
	if n := nodeAt(cfg.raw, item); n != nil {
		p.Line, p.Col = n.Line, n.Column
	}
	c.ps = append(c.ps, p)
}

// nodeAt finds the node of a dotted item path ("sources[0].opcua.x[1]")
// in a YAML text: the value node, or for a key whose value is a mapping or
// list the key itself. nil when the path is not there.
func nodeAt(data []byte, item string) *yaml.Node {
	if len(data) == 0 || item == "" {
		return nil
	}
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil || len(root.Content) == 0 {
		return nil
	}
	n := root.Content[0]
	var last *yaml.Node // key node of the last mapping step
	for _, seg := range strings.Split(item, ".") {
		name, idx, ok := splitIndex(seg)
		if !ok {
			return nil
		}
		if name != "" {
			n = deref(n)
			if n.Kind != yaml.MappingNode {
				return nil
			}
			var next *yaml.Node
			for i := 0; i+1 < len(n.Content); i += 2 {
				if n.Content[i].Value == name {
					last, next = n.Content[i], n.Content[i+1]
				}
			}
			if next == nil {
				return nil
			}
			n = next
		}
		for _, k := range idx {
			n = deref(n)
			if n.Kind != yaml.SequenceNode || k >= len(n.Content) {
				return nil
			}
			n, last = n.Content[k], nil
		}
	}
	if n = deref(n); n.Kind != yaml.ScalarNode && last != nil {
		return last
	}
	return n
}

func deref(n *yaml.Node) *yaml.Node {
	for i := 0; n.Kind == yaml.AliasNode && n.Alias != nil && i < 100; i++ {
		n = n.Alias
	}
	return n
}

// splitIndex splits "name[1][2]" into name and indices.
func splitIndex(seg string) (string, []int, bool) {
	name, rest, _ := strings.Cut(seg, "[")
	if rest == "" {
		return name, nil, !strings.Contains(seg, "]")
	}
	var idx []int
	for _, part := range strings.Split("["+rest, "[")[1:] {
		num, ok := strings.CutSuffix(part, "]")
		k, err := strconv.Atoi(num)
		if !ok || err != nil || k < 0 {
			return "", nil, false
		}
		idx = append(idx, k)
	}
	return name, idx, true
}
