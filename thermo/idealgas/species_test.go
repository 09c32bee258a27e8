package idealgas

import (
	"bufio"
	"encoding/json"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
)

const refDir = "../../testdata/reference/"

// readCSV returns the data rows (header row first) of a reference CSV,
// skipping '#' comment lines.
func readCSV(t testing.TB, name string) [][]string {
	t.Helper()
	f, err := os.Open(refDir + name)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var rows [][]string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		rows = append(rows, strings.Split(line, ","))
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(rows) < 2 {
		t.Fatalf("%s: no data rows", name)
	}
	return rows
}

// csvRecords returns the rows of a reference CSV as maps keyed by header.
func csvRecords(t testing.TB, name string) []map[string]string {
	rows := readCSV(t, name)
	var out []map[string]string
	for _, r := range rows[1:] {
		m := make(map[string]string, len(r))
		for i, h := range rows[0] {
			if i < len(r) {
				m[h] = r[i]
			}
		}
		out = append(out, m)
	}
	return out
}

func num(t testing.TB, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		t.Fatalf("bad number %q: %v", s, err)
	}
	return v
}

func mustSpecies(t testing.TB, name string) Species {
	t.Helper()
	s, err := LookupSpecies(name)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestSpeciesTableMatchesCSV: every coefficient, molar mass and temperature
// bound of the Go table equals testdata/reference/nasa7_gri30.csv (GRI-Mech
// 3.0 thermo30.dat), and every species of the file is in the table.
func TestSpeciesTableMatchesCSV(t *testing.T) {
	seen := map[string]int{}
	for _, r := range csvRecords(t, "nasa7_gri30.csv") {
		s := mustSpecies(t, r["species"])
		seen[s.Name]++
		if got, want := s.MolarMass*1e3, num(t, r["formula_molar_mass_g_mol"]); math.Abs(got-want) > 1e-12*want {
			t.Errorf("%s: molar mass %v g/mol, CSV %v", s.Name, got, want)
		}
		if s.TLow != num(t, r["T_low_K"]) || s.TMid != num(t, r["T_mid_K"]) || s.THigh != num(t, r["T_high_K"]) {
			t.Errorf("%s: T range %v/%v/%v, CSV %s/%s/%s", s.Name, s.TLow, s.TMid, s.THigh, r["T_low_K"], r["T_mid_K"], r["T_high_K"])
		}
		a := s.Low
		if r["set"] == "high" {
			a = s.High
		} else if r["set"] != "low" {
			t.Fatalf("unknown set %q", r["set"])
		}
		for j := 0; j < 7; j++ {
			key := "a" + strconv.Itoa(j+1)
			if want := num(t, r[key]); a[j] != want {
				t.Errorf("%s %s %s = %v, CSV %v", s.Name, r["set"], key, a[j], want)
			}
		}
	}
	for _, s := range speciesTable {
		if seen[s.Name] != 2 && s.Source == sourceGRI30 {
			t.Errorf("%s: claims the GRI-Mech CSV as source but has %d rows there", s.Name, seen[s.Name])
		}
		if s.TMin > s.TLow || s.TMin < 200 {
			t.Errorf("%s: TMin %v outside [200, TLow %v]", s.Name, s.TMin, s.TLow)
		}
	}
}

// TestContinuityAtTMid: the low and high polynomials of the data agree at
// TMid to 1e-6 relative in cp, h and s (a property of a sound NASA-7 fit;
// scale for h is max(|h|, cp T) because h passes through zero).
func TestContinuityAtTMid(t *testing.T) {
	for _, s := range speciesTable {
		T := s.TMid
		lo, hi := s.Low, s.High
		cpl := lo[0] + T*(lo[1]+T*(lo[2]+T*(lo[3]+T*lo[4])))
		cph := hi[0] + T*(hi[1]+T*(hi[2]+T*(hi[3]+T*hi[4])))
		hl := lo[0] + T*(lo[1]/2+T*(lo[2]/3+T*(lo[3]/4+T*lo[4]/5))) + lo[5]/T
		hh := hi[0] + T*(hi[1]/2+T*(hi[2]/3+T*(hi[3]/4+T*hi[4]/5))) + hi[5]/T
		sl := lo[0]*math.Log(T) + T*(lo[1]+T*(lo[2]/2+T*(lo[3]/3+T*lo[4]/4))) + lo[6]
		sh := hi[0]*math.Log(T) + T*(hi[1]+T*(hi[2]/2+T*(hi[3]/3+T*hi[4]/4))) + hi[6]
		cpTol := 1e-6
		if s.Name == "C3H8" {
			cpTol = 5e-6 // a property of the GRI-Mech 3.0 data: propane's cp/R jumps by 4.1e-6 at 1000 K
		}
		if d := math.Abs(cpl-cph) / cph; d > cpTol {
			t.Errorf("%s: cp/R jumps by %.2e relative at %v K", s.Name, d, T)
		}
		if d := math.Abs(hl-hh) / math.Max(math.Abs(hh), cph); d > 1e-6 {
			t.Errorf("%s: h/RT jumps by %.2e relative at %v K", s.Name, d, T)
		}
		if d := math.Abs(sl-sh) / math.Abs(sh); d > 1e-6 {
			t.Errorf("%s: s/R jumps by %.2e relative at %v K", s.Name, d, T)
		}
	}
}

// TestCp298: molar cp at 298.15 K against handbook values.
func TestCp298(t *testing.T) {
	cases := []struct {
		name string
		cp   float64 // J/(mol K)
		tol  float64 // relative
		src  string
	}{
		{"N2", 29.124, 0.003, "JANAF 4th ed. (1998), from memory; GRI N2 fit is 0.2 % low at 300 K"},
		{"O2", 29.376, 0.001, "JANAF 4th ed. (1998), from memory"},
		{"Ar", 20.786, 1e-4, "5/2 R, monatomic ideal gas (exact)"},
		{"CO2", 37.135, 0.001, "JANAF 4th ed. (1998), from memory"},
		{"H2O", 33.590, 0.001, "JANAF 4th ed. (1998), from memory"},
		{"CH4", 35.695, 0.002, "JANAF 4th ed. (1998), from memory"},
		{"CO", 29.142, 0.001, "JANAF 4th ed. (1998), from memory"},
		{"H2", 28.836, 0.001, "JANAF 4th ed. (1998), from memory"},
		{"C2H6", 52.49, 0.005, "NIST Chemistry WebBook (TRC), from memory"},
		{"C3H8", 73.6, 0.005, "NIST Chemistry WebBook (TRC), from memory"},
		{"NH3", 35.63, 0.005, "JANAF 4th ed. (1998), from memory; a rigid-rotor harmonic-oscillator estimate from the fundamentals gives 35.5"},
	}
	for _, c := range cases {
		s := mustSpecies(t, c.name)
		got := R * s.CpR(298.15)
		if d := math.Abs(got/c.cp - 1); d > c.tol {
			t.Errorf("%s: cp(298.15 K) = %.4f J/(mol K), want %.4f ± %.2g %% (%s)", c.name, got, c.cp, 100*c.tol, c.src)
		}
	}
}

// TestCpJANAF: cp against testdata/reference/janaf_cp_from_memory.csv (JANAF
// Thermochemical Tables 4th ed., values from memory; the file's header shows
// them confirmed to 0.002 % for H2O by IAPWS-95 and 0.02 % for N2+O2+Ar by
// the Lemmon (2000) air cp0). The tolerance is therefore set by the
// GRI-Mech fits, not by the reference values: 0.25 % to 1000 K (N2's fit is
// off by up to 0.2 %), 0.5 % at 1500 K (H2O's high-T fit is 0.43 % high).
func TestCpJANAF(t *testing.T) {
	for _, r := range csvRecords(t, "janaf_cp_from_memory.csv") {
		s := mustSpecies(t, r["species"])
		T := num(t, r["T_K"])
		want := num(t, r["cp_J_molK"])
		tol := 0.0025
		if T > 1000 {
			tol = 0.005
		}
		got := R * s.CpR(T)
		if d := math.Abs(got/want - 1); d > tol {
			t.Errorf("%s at %v K: cp = %.4f J/(mol K), JANAF (from memory) %.4f: off by %.3f %% > %.2f %%", s.Name, T, got, want, 100*d, 100*tol)
		}
	}
}

// gergCp0 returns the GERG-2008 ideal-gas molar cp0 in J/(mol K) of one
// component from testdata/reference/eos/gerg2008.json (Kunz and Wagner 2012,
// as stored by NIST's AGA8 code: cp0/R* = n3 + n4 (t1/T)^2/sinh^2(t1/T) +
// n5 (t2/T)^2/cosh^2(t2/T) + n6 (t3/T)^2/sinh^2 + n7 (t4/T)^2/cosh^2).
type gergIdeal struct {
	Formula  string `json:"formula"`
	IdealGas struct {
		W struct {
			N3    float64    `json:"n3_cp0_over_Rstar"`
			N4    float64    `json:"n4"`
			N5    float64    `json:"n5"`
			N6    float64    `json:"n6"`
			N7    float64    `json:"n7"`
			Theta [4]float64 `json:"theta0_K"`
		} `json:"nist_working_form"`
	} `json:"ideal_gas"`
}

func loadGERGIdeal(t testing.TB) (map[string]gergIdeal, float64) {
	b, err := os.ReadFile(refDir + "eos/gerg2008.json")
	if err != nil {
		t.Fatal(err)
	}
	var d struct {
		RStar      float64     `json:"ideal_gas_R_star_J_per_mol_K"`
		Components []gergIdeal `json:"components"`
	}
	if err := json.Unmarshal(b, &d); err != nil {
		t.Fatal(err)
	}
	m := map[string]gergIdeal{}
	for _, c := range d.Components {
		m[strings.ToUpper(c.Formula)] = c
	}
	return m, d.RStar
}

func (g gergIdeal) cp0(T, rstar float64) float64 {
	w := g.IdealGas.W
	c := w.N3
	ns := [4]float64{w.N4, w.N5, w.N6, w.N7}
	for k, th := range w.Theta {
		if th == 0 {
			continue
		}
		x := th / T
		if k%2 == 0 {
			c += ns[k] * x * x / (math.Sinh(x) * math.Sinh(x))
		} else {
			c += ns[k] * x * x / (math.Cosh(x) * math.Cosh(x))
		}
	}
	return c * rstar
}

// TestCpVsGERG2008Ideal compares every species' cp with the independent
// ideal-gas cp0 of GERG-2008 (Kunz and Wagner 2012, via
// testdata/reference/eos/gerg2008.json) from TMin to 600 K (above it the
// GERG-2008 cp0 of CH4 drifts: 0.78 % below GRI at 700 K and 1.1 % at
// 1000 K, where GRI agrees with JANAF to 0.2 % from memory). Within the
// data's own range the two agree to 0.6 % (worst: ethane 0.51 % at 400 K,
// CH4 0.45 % at 600 K) except H2 at 200 K (0.9 %: GRI fit vs GERG's
// normal-hydrogen cp0 at the cold end); the documented extrapolations
// below TLow (see speciesTable) are held to the errors stated there.
func TestCpVsGERG2008Ideal(t *testing.T) {
	g, rstar := loadGERGIdeal(t)
	extrap := map[string]float64{"N2": 0.012, "C3H8": 0.02, "Ar": 1e-4} // relative, below TLow
	for _, s := range speciesTable {
		c, ok := g[strings.ToUpper(s.Name)]
		if !ok {
			continue // NH3 is not a GERG-2008 component
		}
		for _, T := range []float64{200, 225, 250, 273.15, 300, 350, 400, 500, 600} {
			if T < s.TMin {
				continue
			}
			want := c.cp0(T, rstar)
			got := R * s.CpR(T)
			tol := 0.006
			if s.Name == "H2" && T < 250 {
				tol = 0.01
			}
			if T < s.TLow {
				tol = extrap[s.Name]
			}
			if d := math.Abs(got/want - 1); d > tol {
				t.Errorf("%s at %v K: cp %.4f J/(mol K), GERG-2008 cp0 %.4f: off by %.3f %% > %.2f %%", s.Name, T, got, want, 100*d, 100*tol)
			}
		}
	}
}

// TestButaneFit: the fitted butanes reproduce the GERG-2008 ideal-gas cp0
// (testdata/reference/eos/gerg2008.json) to 0.1 % on 200-1000 K (fit
// residual 0.071 % / 0.086 %), and h and s at 298.15 K equal the formation
// values the fit used (from memory, testdata/fit_butanes.py), to 1e-8.
func TestButaneFit(t *testing.T) {
	g, rstar := loadGERGIdeal(t)
	for _, c := range []struct {
		name   string
		dhf, s float64 // J/mol, J/(mol K), from memory
		cp298  float64 // J/(mol K), handbook value from memory
	}{
		{"n-C4H10", -125.79e3, 310.23, 98.49},
		{"i-C4H10", -134.2e3, 294.64, 96.65},
	} {
		s := mustSpecies(t, c.name)
		if s2 := mustSpecies(t, strings.ReplaceAll(c.name, "-", "")); s2.Name != s.Name {
			t.Errorf("alias of %s resolves to %s", c.name, s2.Name)
		}
		for T := 200.0; T <= 1000; T += 10 {
			want := g[strings.ToUpper(c.name)].cp0(T, rstar)
			if d := math.Abs(R*s.CpR(T)/want - 1); d > 0.001 {
				t.Errorf("%s at %v K: cp off GERG-2008 by %.3f %%", c.name, T, 100*d)
			}
		}
		if h := R * 298.15 * s.HRT(298.15); math.Abs(h-c.dhf) > 1e-8*math.Abs(c.dhf) {
			t.Errorf("%s: h(298.15 K) = %v J/mol, want %v", c.name, h, c.dhf)
		}
		if sv := R * s.SR(298.15); math.Abs(sv-c.s) > 1e-8*c.s {
			t.Errorf("%s: s(298.15 K) = %v J/(mol K), want %v", c.name, sv, c.s)
		}
		if d := math.Abs(R*s.CpR(298.15)/c.cp298 - 1); d > 0.003 {
			t.Errorf("%s: cp(298.15 K) = %v J/(mol K), handbook (from memory) %v", c.name, R*s.CpR(298.15), c.cp298)
		}
	}
}
