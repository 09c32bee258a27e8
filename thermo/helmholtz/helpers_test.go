package helmholtz

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// refDir is the project's reference-data directory (tests only; the
// package itself never reads it).
var refDir = filepath.Join("..", "..", "testdata", "reference")

// readCSV reads a reference CSV (leading '#' comment lines, then a header)
// into rows keyed by column name.
func readCSV(t testing.TB, name string) []map[string]string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(refDir, name))
	if err != nil {
		t.Fatalf("reading %s: %v", name, err)
	}
	var lines []string
	for _, l := range strings.Split(string(b), "\n") {
		if strings.HasPrefix(l, "#") || strings.TrimSpace(l) == "" {
			continue
		}
		lines = append(lines, l)
	}
	recs, err := csv.NewReader(strings.NewReader(strings.Join(lines, "\n"))).ReadAll()
	if err != nil {
		t.Fatalf("parsing %s: %v", name, err)
	}
	var out []map[string]string
	for _, r := range recs[1:] {
		m := map[string]string{}
		for i, h := range recs[0] {
			if i < len(r) {
				m[h] = r[i]
			}
		}
		out = append(out, m)
	}
	return out
}

func num(t testing.TB, m map[string]string, key string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(m[key], 64)
	if err != nil {
		t.Fatalf("column %s: %v", key, err)
	}
	return v
}

func relDiff(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b))
}

func mustNew(t testing.TB, name string) *Fluid {
	t.Helper()
	f, err := New(name)
	if err != nil {
		t.Fatal(err)
	}
	return f
}
