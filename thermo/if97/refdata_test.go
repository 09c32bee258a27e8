package if97

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// refDir holds the reference tables copied with their source headers.
const refDir = "../../testdata/reference"

// refRow is one CSV row keyed by column name.
type refRow map[string]string

// f parses a numeric column; an empty cell gives NaN.
func (r refRow) f(t testing.TB, col string) float64 {
	t.Helper()
	s, ok := r[col]
	if !ok {
		t.Fatalf("column %q missing", col)
	}
	if s == "" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("column %q: %v", col, err)
	}
	return v
}

// readRef reads a reference CSV: '#' comment lines, then a header row.
func readRef(t testing.TB, name string) []refRow {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(refDir, name))
	if err != nil {
		t.Fatal(err)
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
		t.Fatal(err)
	}
	if len(recs) < 2 {
		t.Fatalf("%s: no data rows", name)
	}
	hdr := recs[0]
	rows := make([]refRow, 0, len(recs)-1)
	for _, rec := range recs[1:] {
		r := refRow{}
		for i, h := range hdr {
			if i < len(rec) {
				r[h] = rec[i]
			}
		}
		rows = append(rows, r)
	}
	return rows
}

// toSI converts a reference-table value to SI by its unit column.
func toSI(t testing.TB, v float64, unit string) float64 {
	t.Helper()
	switch unit {
	case "MPa":
		return v * 1e6
	case "kJ/kg", "kJ/(kg K)":
		return v * 1e3
	case "K", "m3/kg", "m/s", "kg/m3", "":
		return v
	}
	t.Fatalf("unknown unit %q", unit)
	return 0
}
