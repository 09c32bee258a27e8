package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/gopcua/opcua"
	"github.com/gopcua/opcua/id"
	"github.com/gopcua/opcua/ua"
)

func init() {
	register("browse", "list the variables of an OPC UA server (NodeId, browse name, data type, value)", runBrowse)
}

const browseUsage = `usage: exergywatch browse [flags] <endpoint>

Lists the variables below a start node (default: the Objects folder) of an
OPC UA server: NodeId, browse path, data type and current value, so that a
tag map can be written from them. <endpoint> is opc.tcp://host:port[/path].

Flags:
  --security-policy None|Basic256Sha256     (default None)
  --security-mode None|Sign|SignAndEncrypt  (default None)
  --auth anonymous|username|certificate     (default anonymous)
  --user NAME                               password from $EXERGYWATCH_OPCUA_PASSWORD
  --cert FILE --key FILE                    application instance certificate and key
                                            (a secure policy without them uses an
                                            ephemeral self-signed certificate)
  --trust FILE|DIR                          a trusted server certificate (DER or PEM) or a
                                            directory of them; repeatable. With a secure
                                            mode and no --trust, browse only prints the
                                            certificate the server offers (subject, SHA-1
                                            and SHA-256 thumbprints) and connects to nothing
  --save-server-certificate FILE            write the certificate a server offers (DER) to
                                            FILE when it is not trusted (never overwrites);
                                            compare its thumbprint with the server's own
                                            display before trusting it
  --accept-any-server-certificate           do not check the server (commissioning only)
  --root NODEID                             start node (default i=85, Objects)
  --depth N                                 levels to descend (default 6)
  --max N                                   stop after N variables (default 5000)
  --timeout 30s                             overall time limit
`

func runBrowse(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("browse", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	policy := fs.String("security-policy", "None", "")
	mode := fs.String("security-mode", "None", "")
	auth := fs.String("auth", "anonymous", "")
	user := fs.String("user", "", "")
	cert := fs.String("cert", "", "")
	key := fs.String("key", "", "")
	var trust []string
	fs.Func("trust", "", func(v string) error { trust = append(trust, v); return nil })
	saveCert := fs.String("save-server-certificate", "", "")
	acceptAny := fs.Bool("accept-any-server-certificate", false, "")
	root := fs.String("root", "i=85", "")
	depth := fs.Int("depth", 6, "")
	maxVars := fs.Int("max", 5000, "")
	timeout := fs.Duration("timeout", 30*time.Second, "")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprint(stdout, browseUsage)
			return 0
		}
		fmt.Fprintf(stderr, "exergywatch browse: %v\n%s", err, browseUsage)
		return 2
	}
	if fs.NArg() != 1 {
		fmt.Fprintf(stderr, "exergywatch browse: need exactly one endpoint\n%s", browseUsage)
		return 2
	}
	rootID, err := ua.ParseNodeID(*root)
	if err != nil {
		fmt.Fprintf(stderr, "exergywatch browse: --root %q: %v\n", *root, err)
		return 2
	}
	if *depth < 1 || *maxVars < 1 || *timeout <= 0 {
		fmt.Fprintln(stderr, "exergywatch browse: --depth, --max and --timeout must be positive")
		return 2
	}
	cfg := opcuasrc.Config{Endpoint: fs.Arg(0), SecurityPolicy: *policy, SecurityMode: *mode, Auth: *auth, User: *user,
		Password: os.Getenv("EXERGYWATCH_OPCUA_PASSWORD"), CertFile: *cert, KeyFile: *key, RequestTimeout: *timeout,
		TrustedServerCertificates: trust, AcceptAnyServerCertificate: *acceptAny}
	ctx, cancel := context.WithTimeout(context.Background(), *timeout)
	defer cancel()
	if *mode != "None" && len(trust) == 0 && !*acceptAny {
		// Nothing to check against: show what the server offers, so that
		// it can be compared and trusted, and connect to nothing.
		ue, err := opcuasrc.EndpointCertificate(ctx, cfg)
		if err != nil {
			fmt.Fprintf(stderr, "exergywatch browse: %v\n", err)
			if errors.Is(err, opcuasrc.ErrConfig) {
				return 2
			}
			return 1
		}
		fmt.Fprintln(stderr, "exergywatch browse: no --trust given; the server offers this certificate (not connected):")
		printServerCertificate(stderr, ue, *saveCert)
		return 1
	}
	if *acceptAny {
		fmt.Fprintln(stderr, "exergywatch browse: WARNING: the server's certificate is not checked (--accept-any-server-certificate)")
	}
	c, err := opcuasrc.Connect(ctx, cfg, nil, nil, nil)
	if err != nil {
		var ue *opcuasrc.UntrustedServerError
		if errors.As(err, &ue) && ue.Certificate != nil {
			fmt.Fprintf(stderr, "exergywatch browse: the server's certificate is refused: %s (%s)\n", ue.Reason, ue.Detail)
			printServerCertificate(stderr, ue, *saveCert)
			return 1
		}
		fmt.Fprintf(stderr, "exergywatch browse: %v\n", err)
		if errors.Is(err, opcuasrc.ErrConfig) {
			return 2
		}
		return 1
	}
	defer func() {
		cctx, ccancel := context.WithTimeout(context.Background(), 2*time.Second)
		_ = c.Close(cctx)
		ccancel()
	}()
	vars, err := browseVariables(ctx, c, rootID, *depth, *maxVars)
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "NODEID\tBROWSE PATH\tDATA TYPE\tVALUE")
	for _, v := range vars {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\n", v.nodeID, v.path, v.dataType, v.value)
	}
	_ = tw.Flush()
	if err != nil {
		fmt.Fprintf(stderr, "exergywatch browse: %v (listing may be incomplete)\n", err)
		return 1
	}
	if len(vars) >= *maxVars {
		fmt.Fprintf(stderr, "exergywatch browse: stopped at --max %d variables\n", *maxVars)
	}
	return 0
}

// printServerCertificate shows a server certificate for an engineer to
// compare with the server's own display, and saves it when asked.
func printServerCertificate(w io.Writer, ue *opcuasrc.UntrustedServerError, save string) {
	validity := ue.NotBefore.UTC().Format(time.RFC3339) + " to " + ue.NotAfter.UTC().Format(time.RFC3339)
	if now := time.Now(); now.After(ue.NotAfter) {
		validity += " (EXPIRED)"
	} else if now.Before(ue.NotBefore) {
		validity += " (NOT YET VALID)"
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  endpoint\t%s\n", ue.Endpoint)
	fmt.Fprintf(tw, "  subject\t%s\n", ue.Subject)
	fmt.Fprintf(tw, "  certificate URIs\t%s\n", strings.Join(ue.ApplicationURIs, ", "))
	fmt.Fprintf(tw, "  endpoint application URI\t%s\n", ue.EndpointApplicationURI)
	fmt.Fprintf(tw, "  valid\t%s\n", validity)
	fmt.Fprintf(tw, "  SHA-1 thumbprint\t%s\n", ue.SHA1)
	fmt.Fprintf(tw, "  SHA-256 thumbprint\t%s\n", ue.SHA256)
	_ = tw.Flush()
	if save != "" {
		f, err := os.OpenFile(save, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
		if err == nil {
			_, err = f.Write(ue.Certificate)
			if cerr := f.Close(); err == nil {
				err = cerr
			}
		}
		if err != nil {
			fmt.Fprintf(w, "exergywatch browse: --save-server-certificate: %v\n", err)
		} else {
			fmt.Fprintf(w, "saved the certificate (DER) to %s\n", save)
		}
	}
	fmt.Fprintln(w, "If a thumbprint equals the one the server shows for its own certificate, add the saved file "+
		"to the source's trusted_server_certificates (or give it to browse with --trust).")
}

type browsedVar struct {
	nodeID, path, dataType, value string
}

// browseVariables walks hierarchical references breadth-first from root,
// collecting Variable nodes, then reads their DataType and Value in
// batches.
func browseVariables(ctx context.Context, c *opcua.Client, root *ua.NodeID, depth, maxVars int) ([]browsedVar, error) {
	seen := map[string]bool{root.String(): true}
	level := []browseItem{{root, ""}}
	var vars []browseItem
	for d := 0; d < depth && len(level) > 0 && len(vars) < maxVars; d++ {
		var next []browseItem
		for _, it := range level {
			refs, err := browseRefs(ctx, c, it.id)
			if err != nil {
				return finish(ctx, c, vars, fmt.Errorf("browse %s: %w", it.id, err))
			}
			for _, r := range refs {
				nid := r.NodeID.NodeID
				if nid == nil || seen[nid.String()] || r.NodeID.ServerIndex != 0 {
					continue
				}
				seen[nid.String()] = true
				p := r.BrowseName.Name
				if r.BrowseName.NamespaceIndex != 0 {
					p = fmt.Sprintf("%d:%s", r.BrowseName.NamespaceIndex, r.BrowseName.Name)
				}
				if it.path != "" {
					p = it.path + "/" + p
				}
				child := browseItem{nid, p}
				if r.NodeClass == ua.NodeClassVariable && len(vars) < maxVars {
					vars = append(vars, child)
				}
				next = append(next, child)
			}
		}
		level = next
	}
	out := make([]browsedVar, len(vars))
	for i, v := range vars {
		out[i] = browsedVar{nodeID: v.id.String(), path: v.path}
	}
	return readVars(ctx, c, out)
}

type browseItem struct {
	id   *ua.NodeID
	path string
}

func finish(ctx context.Context, c *opcua.Client, vars []browseItem, err error) ([]browsedVar, error) {
	out := make([]browsedVar, len(vars))
	for i, v := range vars {
		out[i] = browsedVar{nodeID: v.id.String(), path: v.path}
	}
	out, rerr := readVars(ctx, c, out)
	return out, errors.Join(err, rerr)
}

func browseRefs(ctx context.Context, c *opcua.Client, n *ua.NodeID) ([]*ua.ReferenceDescription, error) {
	req := &ua.BrowseRequest{
		View:                          &ua.ViewDescription{ViewID: ua.NewTwoByteNodeID(0)},
		RequestedMaxReferencesPerNode: 1000,
		NodesToBrowse: []*ua.BrowseDescription{{
			NodeID: n, BrowseDirection: ua.BrowseDirectionForward, ReferenceTypeID: ua.NewNumericNodeID(0, id.HierarchicalReferences),
			IncludeSubtypes: true, NodeClassMask: uint32(ua.NodeClassObject | ua.NodeClassVariable),
			ResultMask: uint32(ua.BrowseResultMaskAll),
		}},
	}
	res, err := c.Browse(ctx, req)
	if err != nil {
		return nil, err
	}
	if len(res.Results) != 1 {
		return nil, fmt.Errorf("browse returned %d results", len(res.Results))
	}
	r := res.Results[0]
	if r.StatusCode != ua.StatusOK {
		return nil, r.StatusCode
	}
	refs := r.References
	cp := r.ContinuationPoint
	for len(cp) > 0 {
		nres, err := c.BrowseNext(ctx, &ua.BrowseNextRequest{ContinuationPoints: [][]byte{cp}})
		if err != nil {
			return refs, err
		}
		if len(nres.Results) != 1 || nres.Results[0].StatusCode != ua.StatusOK {
			break
		}
		refs = append(refs, nres.Results[0].References...)
		cp = nres.Results[0].ContinuationPoint
	}
	return refs, nil
}

// readVars fills data type and value, 200 nodes per Read.
func readVars(ctx context.Context, c *opcua.Client, vars []browsedVar) ([]browsedVar, error) {
	const batch = 200
	for start := 0; start < len(vars); start += batch {
		end := min(start+batch, len(vars))
		var nodes []*ua.ReadValueID
		for _, v := range vars[start:end] {
			nid, _ := ua.ParseNodeID(v.nodeID)
			nodes = append(nodes, &ua.ReadValueID{NodeID: nid, AttributeID: ua.AttributeIDDataType},
				&ua.ReadValueID{NodeID: nid, AttributeID: ua.AttributeIDValue})
		}
		res, err := c.Read(ctx, &ua.ReadRequest{NodesToRead: nodes, TimestampsToReturn: ua.TimestampsToReturnNeither})
		if err != nil {
			return vars, fmt.Errorf("read: %w", err)
		}
		for i := start; i < end; i++ {
			k := 2 * (i - start)
			if k+1 >= len(res.Results) {
				break
			}
			vars[i].dataType = dataTypeName(res.Results[k])
			vars[i].value = valueText(res.Results[k+1])
			// Some servers fill the DataType attribute wrongly; show the
			// type the value actually arrives in when it differs.
			if dv := res.Results[k+1]; dv != nil && dv.Status == ua.StatusOK && dv.Value != nil {
				if vt := strings.TrimPrefix(dv.Value.Type().String(), "TypeID"); vt != vars[i].dataType && vt != "Null" {
					vars[i].dataType += " (value " + vt + ")"
				}
			}
		}
	}
	return vars, nil
}

func dataTypeName(dv *ua.DataValue) string {
	if dv == nil || dv.Status != ua.StatusOK || dv.Value == nil {
		return "?"
	}
	var nid *ua.NodeID
	switch x := dv.Value.Value().(type) {
	case *ua.NodeID:
		nid = x
	case *ua.ExpandedNodeID:
		nid = x.NodeID
	}
	if nid == nil {
		return "?"
	}
	if nid.Namespace() == 0 && nid.Type() != ua.NodeIDTypeString {
		if n := id.Name(nid.IntID()); n != "" {
			return n
		}
	}
	return nid.String()
}

func valueText(dv *ua.DataValue) string {
	if dv == nil {
		return "?"
	}
	if dv.Status != ua.StatusOK {
		return "(" + dv.Status.Error() + ")"
	}
	if dv.Value == nil {
		return "(null)"
	}
	s := fmt.Sprint(dv.Value.Value())
	s = strings.Map(func(r rune) rune {
		if r == '\n' || r == '\t' || r == '\r' {
			return ' '
		}
		return r
	}, s)
	if len(s) > 60 {
		s = s[:57] + "..."
	}
	return s
}
