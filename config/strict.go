package config

import (
	"errors"
	"fmt"
	"reflect"
	"sort"
	"strings"
	"time"

	"gopkg.in/yaml.v3"
)

// Problem is one error in a configuration file: where it is, which item it
// concerns, what is wrong and how to fix it.
type Problem struct {
	File string // file name as given to Load
	Line int    // 1-based; 0 when the problem has no single position
	Col  int    // 1-based
	Item string // dotted path of the item, e.g. "machines[2].inlet.p"
	Msg  string // what is wrong
	Hint string // how to fix it (may be empty)
}

func (p *Problem) Error() string {
	var b strings.Builder
	b.WriteString(p.File)
	if p.Line > 0 {
		fmt.Fprintf(&b, ":%d:%d", p.Line, p.Col)
	}
	if p.Item != "" {
		fmt.Fprintf(&b, ": %s", p.Item)
	}
	fmt.Fprintf(&b, ": %s", p.Msg)
	if p.Hint != "" {
		fmt.Fprintf(&b, " (fix: %s)", p.Hint)
	}
	return b.String()
}

// ErrInvalid is wrapped by every error Load returns for a file it could read.
var ErrInvalid = errors.New("invalid configuration")

// Problems is the list of every problem found in one file. It wraps
// ErrInvalid.
type Problems []*Problem

func (ps Problems) Error() string {
	if len(ps) == 1 {
		return ps[0].Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%d problems in configuration:", len(ps))
	for _, p := range ps {
		b.WriteString("\n  ")
		b.WriteString(p.Error())
	}
	return b.String()
}

// Unwrap makes errors.Is(err, ErrInvalid) true.
func (ps Problems) Unwrap() error { return ErrInvalid }

// strictChecker walks a YAML node tree against a Go type and reports keys the
// type does not have, duplicate keys and shape mismatches, with positions.
type strictChecker struct {
	file     string
	problems Problems
}

var unmarshalerType = reflect.TypeOf((*yaml.Unmarshaler)(nil)).Elem()

var durationType = reflect.TypeOf(time.Duration(0))

func (c *strictChecker) add(n *yaml.Node, item, msg, hint string) {
	p := &Problem{File: c.file, Item: item, Msg: msg, Hint: hint}
	if n != nil {
		p.Line, p.Col = n.Line, n.Column
	}
	c.problems = append(c.problems, p)
}

// yamlFields returns the YAML keys of a struct type (following inline
// embedded structs) mapped to their field types.
func yamlFields(t reflect.Type, out map[string]reflect.Type) {
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		tag := f.Tag.Get("yaml")
		if tag == "-" {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		if strings.Contains(opts, "inline") {
			ft := f.Type
			if ft.Kind() == reflect.Pointer {
				ft = ft.Elem()
			}
			if ft.Kind() == reflect.Struct {
				yamlFields(ft, out)
			}
			continue
		}
		if name == "" {
			name = strings.ToLower(f.Name)
		}
		out[name] = f.Type
	}
}

func (c *strictChecker) check(n *yaml.Node, t reflect.Type, item string) {
	if n == nil {
		return
	}
	if n.Kind == yaml.DocumentNode {
		for _, child := range n.Content {
			c.check(child, t, item)
		}
		return
	}
	if n.Kind == yaml.AliasNode {
		c.check(n.Alias, t, item)
		return
	}
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	if reflect.PointerTo(t).Implements(unmarshalerType) || t.Implements(unmarshalerType) {
		return // the type checks its own node
	}
	if n.Kind == yaml.ScalarNode && n.Tag == "!!null" {
		return
	}
	switch t.Kind() {
	case reflect.Struct:
		if n.Kind != yaml.MappingNode {
			c.add(n, item, fmt.Sprintf("expected a mapping (key: value lines), found %s", kindName(n)), "")
			return
		}
		fields := map[string]reflect.Type{}
		yamlFields(t, fields)
		seen := map[string]bool{}
		for i := 0; i+1 < len(n.Content); i += 2 {
			k, v := n.Content[i], n.Content[i+1]
			key := k.Value
			sub := join(item, key)
			if seen[key] {
				c.add(k, sub, "key given twice", "keep one of them")
				continue
			}
			seen[key] = true
			ft, ok := fields[key]
			if !ok {
				c.add(k, sub, fmt.Sprintf("unknown key %q", key), suggest(key, fields))
				continue
			}
			c.check(v, ft, sub)
		}
	case reflect.Slice, reflect.Array:
		if n.Kind != yaml.SequenceNode {
			c.add(n, item, fmt.Sprintf("expected a list (lines starting with '- '), found %s", kindName(n)), "")
			return
		}
		for i, e := range n.Content {
			c.check(e, t.Elem(), fmt.Sprintf("%s[%d]", item, i))
		}
	case reflect.Map:
		if n.Kind != yaml.MappingNode {
			c.add(n, item, fmt.Sprintf("expected a mapping, found %s", kindName(n)), "")
			return
		}
		seen := map[string]bool{}
		for i := 0; i+1 < len(n.Content); i += 2 {
			k, v := n.Content[i], n.Content[i+1]
			if seen[k.Value] {
				c.add(k, join(item, k.Value), "key given twice", "keep one of them")
				continue
			}
			seen[k.Value] = true
			c.check(v, t.Elem(), join(item, k.Value))
		}
	default:
		if n.Kind != yaml.ScalarNode {
			c.add(n, item, fmt.Sprintf("expected a single value, found %s", kindName(n)), "")
			return
		}
		if t == durationType {
			c.checkDuration(n, item)
		}
	}
}

// checkDuration checks a time.Duration value (written like "5s", "250ms",
// "720h") so that a bare number or a negative span is reported with its
// position and a hint, not as a decoder type error.
func (c *strictChecker) checkDuration(n *yaml.Node, item string) {
	v, err := time.ParseDuration(strings.TrimSpace(n.Value))
	switch {
	case err != nil || n.ShortTag() != "!!str": // a bare number, even 0, has no unit
		c.add(n, item, fmt.Sprintf("%q is not a duration", n.Value), "write a number with a unit: ms, s, m or h, e.g. 5s, 250ms or 720h")
	case v < 0:
		c.add(n, item, fmt.Sprintf("duration %q is negative", n.Value), "use a positive duration")
	}
}

func join(item, key string) string {
	if item == "" {
		return key
	}
	return item + "." + key
}

func kindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		return fmt.Sprintf("the value %q", n.Value)
	}
	return "something else"
}

// suggest proposes the closest known key, or lists them.
func suggest(key string, fields map[string]reflect.Type) string {
	names := make([]string, 0, len(fields))
	for k := range fields {
		names = append(names, k)
	}
	sort.Strings(names)
	best, bestD := "", 1<<30
	for _, k := range names {
		if d := editDistance(strings.ToLower(key), k); d < bestD {
			best, bestD = k, d
		}
	}
	if best != "" && bestD <= 2 {
		return fmt.Sprintf("did you mean %q?", best)
	}
	// A key with a unit or secret-source suffix (flush_interval_ms,
	// retention_hours, token_env) names a key written without it.
	for _, k := range names {
		switch rest, ok := strings.CutPrefix(strings.ToLower(key), k+"_"); {
		case !ok:
		case rest == "ms" || rest == "s" || rest == "h" || rest == "hours" || rest == "days":
			return fmt.Sprintf("did you mean %q? write a duration with its unit, e.g. %s: 5s, 250ms or 720h", k, k)
		case rest == "env" || rest == "file":
			return fmt.Sprintf("did you mean %q? write %s: env:VARIABLE_NAME or %s: file:/path/to/secret", k, k, k)
		}
	}
	return "known keys here: " + strings.Join(names, ", ")
}

func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// decodeStrict parses data into v (a pointer to a struct already holding the
// defaults), reporting unknown keys and type errors with positions.
func decodeStrict(file string, data []byte, v any) Problems {
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return Problems{syntaxProblem(file, err)}
	}
	if len(root.Content) == 0 {
		return Problems{{File: file, Msg: "the file is empty", Hint: "start from an example in deploy/"}}
	}
	c := &strictChecker{file: file}
	c.check(&root, reflect.TypeOf(v), "")
	if len(c.problems) > 0 {
		return c.problems
	}
	if err := root.Decode(v); err != nil {
		return typeProblems(file, err)
	}
	return nil
}

func syntaxProblem(file string, err error) *Problem {
	msg := strings.TrimPrefix(err.Error(), "yaml: ")
	p := &Problem{File: file, Msg: "YAML syntax: " + msg, Hint: "check indentation (spaces, not tabs) and quoting"}
	var line int
	if _, e := fmt.Sscanf(msg, "line %d:", &line); e == nil {
		p.Line, p.Col = line, 1
	}
	return p
}

func typeProblems(file string, err error) Problems {
	var te *yaml.TypeError
	if errors.As(err, &te) {
		var out Problems
		for _, m := range te.Errors {
			p := &Problem{File: file, Msg: m}
			var line int
			if _, e := fmt.Sscanf(m, "line %d:", &line); e == nil {
				p.Line, p.Col = line, 1
				if i := strings.Index(m, ": "); i >= 0 {
					p.Msg = m[i+2:]
				}
			}
			out = append(out, p)
		}
		return out
	}
	var p *Problem
	if errors.As(err, &p) {
		if p.File == "" {
			p.File = file
		}
		return Problems{p}
	}
	return Problems{{File: file, Msg: err.Error()}}
}
