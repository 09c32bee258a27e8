package helmholtz

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

// TestEmbeddedDataMatchesReference: the embedded coefficient files are
// byte-identical copies of testdata/reference/eos (source: CoolProp commit
// ea27c63, see testdata/reference/eos/NOTES.md).
func TestEmbeddedDataMatchesReference(t *testing.T) {
	ents, err := dataFS.ReadDir("data")
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, e := range ents {
		if filepath.Ext(e.Name()) != ".json" {
			continue
		}
		n++
		emb, _ := dataFS.ReadFile("data/" + e.Name())
		ref, err := os.ReadFile(filepath.Join(refDir, "eos", e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(emb, ref) {
			t.Errorf("data/%s differs from testdata/reference/eos/%s", e.Name(), e.Name())
		}
	}
	if n != 7 {
		t.Errorf("embedded %d JSON files, want 7", n)
	}
}

// TestIAPWS95Verification: water against IAPWS R6-95(2018) Tables 6, 7, 8 as
// transcribed in testdata/reference/iapws95_verification.csv (values
// confirmed there against python3-iapws 1.5.2), to the printed digits
// (abs_tol = half a unit in the last printed digit).
func TestIAPWS95Verification(t *testing.T) {
	f := mustNew(t, "water-iapws95")
	Tr, rhor := f.Reducing()
	if relDiff(rhor, 322) > 1e-12 || Tr != 647.096 {
		t.Fatalf("reducing state %g K, %g kg/m3; IAPWS-95 uses 647.096 K, 322 kg/m3", Tr, rhor)
	}
	rows := readCSV(t, "iapws95_verification.csv")
	if len(rows) < 70 {
		t.Fatalf("only %d rows", len(rows))
	}
	for _, r := range rows {
		T := num(t, r, "in1_value")
		want := num(t, r, "value")
		tol := num(t, r, "abs_tol")
		prop := r["property"]
		var got float64
		switch r["table"] {
		case "Table 6":
			rho := num(t, r, "in2_value")
			id, res, err := f.Parts(647.096/T, rho/322)
			if err != nil {
				t.Fatal(err)
			}
			got = map[string]float64{
				"phi0": id.Phi, "phi0_delta": id.PhiDelta, "phi0_deltadelta": id.PhiDeltaDelta,
				"phi0_tau": id.PhiTau, "phi0_tautau": id.PhiTauTau, "phi0_deltatau": id.PhiDeltaTau,
				"phir": res.Phi, "phir_delta": res.PhiDelta, "phir_deltadelta": res.PhiDeltaDelta,
				"phir_tau": res.PhiTau, "phir_tautau": res.PhiTauTau, "phir_deltatau": res.PhiDeltaTau,
			}[prop]
		case "Table 7":
			rho := num(t, r, "in2_value")
			s, err := f.StateTRho(T, rho)
			if err != nil {
				t.Fatal(err)
			}
			got = map[string]float64{"p": s.P / 1e6, "cv": s.Cv / 1e3, "w": s.W, "s": s.S / 1e3}[prop]
		case "Table 8":
			l, v, err := f.Saturated(T)
			if err != nil {
				t.Fatal(err)
			}
			got = map[string]float64{
				"psat": l.P / 1e6, "rho_liq": l.Rho, "rho_vap": v.Rho,
				"h_liq": l.H / 1e3, "h_vap": v.H / 1e3, "s_liq": l.S / 1e3, "s_vap": v.S / 1e3,
			}[prop]
		default:
			t.Fatalf("unknown table %q", r["table"])
		}
		if math.Abs(got-want) > tol {
			t.Errorf("%s T=%g %s: got %.12g, want %.12g (tol %g)", r["table"], T, prop, got, want, tol)
		}
	}
}

// TestPythonIAPWSCrosscheck: water (IAPWS-95), ammonia (Tillner-Roth,
// Harms-Watzenberg & Baehr 1993: our "ammonia-1993", the equation
// python3-iapws's iapws.ammonia.NH3 implements) and dry air (Lemmon et al.
// 2000) at (T, rho) against python3-iapws 1.5.2 values in
// testdata/reference/eos/pure_fluid_crosscheck.csv. p, cv, cp, w to 1e-9
// relative (NOTES.md section 6: 1.5e-9 in water p at 0.1 MPa liquid, 9e-10
// in cp near the critical point); h and s directly for water and ammonia
// (same reference state), for air as differences from the 273.15 K row
// (python3-iapws uses h = s = 0 at 273.15 K, 101.325 kPa).
func TestPythonIAPWSCrosscheck(t *testing.T) {
	rows := readCSV(t, filepath.Join("eos", "pure_fluid_crosscheck.csv"))
	names := map[string]string{"water": "water-iapws95", "ammonia": "ammonia-1993", "air": "air-helmholtz"}
	var airH0, airS0, airH0ref, airS0ref float64
	for _, r := range rows {
		f := mustNew(t, names[r["fluid"]])
		T, rho := num(t, r, "T_K"), num(t, r, "rho_kg_m3")
		s, err := f.StateTRho(T, rho)
		if err != nil {
			t.Fatal(err)
		}
		pTol := 1e-9
		if r["fluid"] == "water" && T == 300 && rho < 1000 {
			pTol = 2e-9 // compressed liquid at 0.1 MPa: p is a small difference of large terms (NOTES.md section 6)
		}
		for _, c := range []struct {
			name      string
			got, want float64
			tol       float64
		}{
			{"p", s.P / 1e6, num(t, r, "p_MPa"), pTol},
			{"cv", s.Cv / 1e3, num(t, r, "cv_kJ_kgK"), 1e-9},
			{"cp", s.Cp / 1e3, num(t, r, "cp_kJ_kgK"), 1e-9},
			{"w", s.W, num(t, r, "w_m_s"), 1e-9},
		} {
			if d := relDiff(c.got, c.want); d > c.tol {
				t.Errorf("%s T=%g rho=%g %s: got %.12g, python3-iapws %.12g (rel %.2g)", r["fluid"], T, rho, c.name, c.got, c.want, d)
			}
		}
		hWant, sWant := num(t, r, "h_kJ_kg"), num(t, r, "s_kJ_kgK")
		if r["fluid"] == "air" && T == 273.15 {
			airH0, airS0, airH0ref, airS0ref = s.H/1e3, s.S/1e3, hWant, sWant
		}
		switch r["fluid"] {
		case "water", "ammonia":
			// absolute: same reference state (python3-iapws 1.5.2)
			if math.Abs(s.H/1e3-hWant) > 1e-8*math.Max(1, math.Abs(hWant)) || math.Abs(s.S/1e3-sWant) > 1e-10*math.Max(1, math.Abs(sWant)) {
				t.Errorf("%s T=%g rho=%g: h %.12g s %.12g, python3-iapws h %.12g s %.12g", r["fluid"], T, rho, s.H/1e3, s.S/1e3, hWant, sWant)
			}
		}
	}
	if airH0ref == 0 && airS0ref == 0 && airH0 == 0 {
		t.Fatal("no 273.15 K air row")
	}
	for _, r := range rows {
		if r["fluid"] != "air" {
			continue
		}
		f := mustNew(t, "air-helmholtz")
		T, rho := num(t, r, "T_K"), num(t, r, "rho_kg_m3")
		s, _ := f.StateTRho(T, rho)
		dh, dhW := s.H/1e3-airH0, num(t, r, "h_kJ_kg")-airH0ref
		ds, dsW := s.S/1e3-airS0, num(t, r, "s_kJ_kgK")-airS0ref
		if math.Abs(dh-dhW) > 1e-9*math.Max(1, math.Abs(dhW)) || math.Abs(ds-dsW) > 1e-11*math.Max(1, math.Abs(dsW)) {
			t.Errorf("air T=%g rho=%g: h-h0 %.12g s-s0 %.12g; python3-iapws %.12g %.12g", T, rho, dh, ds, dhW, dsW)
		}
	}
}

// TestAirLemmon2000Crosscheck: the (p,T) flash of pseudo-pure dry air against
// testdata/reference/air_lemmon2000_crosscheck.csv (Lemmon et al. 2000 via
// python3-iapws 1.5.2, M = 28.96546 g/mol as in air.json): rho, cp, cv, w to
// 1e-9 relative; molar h and s as differences from the 273.15 K,
// 0.101325 MPa row (the file's reference state) to 1e-6 relative (the brief's
// tolerance; they agree far closer); the isentropic end state T2s from
// s(p2, T2s) = s1 (our own s1) to 1e-9 relative.
func TestAirLemmon2000Crosscheck(t *testing.T) {
	f := mustNew(t, "air-helmholtz")
	rows := readCSV(t, "air_lemmon2000_crosscheck.csv")
	if len(rows) != 270 {
		t.Fatalf("%d rows, want 270", len(rows))
	}
	M := f.MolarMass()
	if relDiff(M, 0.02896546) > 1e-15 {
		t.Fatalf("molar mass %g, file uses 0.02896546 kg/mol", M)
	}
	s0, err := f.Flash(thermo.PT, 101325, 273.15)
	if err != nil {
		t.Fatal(err)
	}
	var h0W, s0W float64
	found := false
	for _, r := range rows {
		if num(t, r, "p_MPa") == 0.101325 && num(t, r, "T_K") == 273.15 {
			h0W, s0W, found = num(t, r, "h_J_mol"), num(t, r, "s_J_molK"), true
		}
	}
	if !found {
		t.Fatal("no reference row")
	}
	for _, r := range rows {
		p, T := num(t, r, "p_MPa")*1e6, num(t, r, "T_K")
		s, err := f.Flash(thermo.PT, p, T)
		if err != nil {
			t.Errorf("p=%g T=%g: %v", p, T, err)
			continue
		}
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"rho", s.Rho, num(t, r, "rho_kg_m3")},
			{"cp", s.Cp / 1e3, num(t, r, "cp_kJ_kgK")},
			{"cv", s.Cv / 1e3, num(t, r, "cv_kJ_kgK")},
			{"w", s.W, num(t, r, "w_m_s")},
			{"Z", p / (s.Rho * f.GasConstant() * T), num(t, r, "Z")},
		} {
			if d := relDiff(c.got, c.want); d > 1e-9 {
				t.Errorf("p=%g T=%g %s: got %.12g, python3-iapws %.12g (rel %.2g)", p, T, c.name, c.got, c.want, d)
			}
		}
		dh := (s.H - s0.H) * M
		dhW := num(t, r, "h_J_mol") - h0W
		ds := (s.S - s0.S) * M
		dsW := num(t, r, "s_J_molK") - s0W
		if math.Abs(dh-dhW) > 1e-6*math.Max(math.Abs(dhW), 1) {
			t.Errorf("p=%g T=%g: h difference %.10g J/mol, python3-iapws %.10g", p, T, dh, dhW)
		}
		if math.Abs(ds-dsW) > 1e-6*math.Max(math.Abs(dsW), 1e-3) {
			t.Errorf("p=%g T=%g: s difference %.10g J/(mol K), python3-iapws %.10g", p, T, ds, dsW)
		}
		// isentropic end state
		p2 := num(t, r, "p2_MPa") * 1e6
		e, err := f.Flash(thermo.PS, p2, s.S)
		if err != nil {
			t.Errorf("p2=%g s=%g: %v", p2, s.S, err)
			continue
		}
		// Row 5 MPa, 200 K -> 1.25 MPa: the file's T2s = 132.6306 K is not
		// isentropic in the equation (s there is 8.6 J/(kg K) above s1, and
		// the equation agrees with python3-iapws to 1e-12 elsewhere); its
		// solver apparently stopped just below the reducing temperature
		// 132.6312 K. Our s(p2, T2s) = s1 is checked below instead.
		badRow := p == 5e6 && T == 200
		if d := relDiff(e.T, num(t, r, "T2s_K")); d > 1e-9 && !badRow {
			t.Errorf("p=%g T=%g -> p2=%g: T2s %.12g, python3-iapws %.12g (rel %.2g)", p, T, p2, e.T, num(t, r, "T2s_K"), d)
		}
		if d := math.Abs(e.S-s.S) / math.Max(math.Abs(s.S), f.GasConstant()); d > 1e-9 {
			t.Errorf("s(p2, T2s) = %.12g, s1 = %.12g", e.S, s.S)
		}
		if badRow {
			b, err := f.Flash(thermo.PT, p2, num(t, r, "T2s_K"))
			if err != nil || b.S-s.S < 1 {
				t.Errorf("expected the file's T2s for the 5 MPa, 200 K row to be non-isentropic: s - s1 = %g, %v", b.S-s.S, err)
			}
		}
	}
}

// TestCoolPropCheckStates: every equation reproduces the states CoolProp
// stores in its fluid file (coolprop_check_states in the JSON; CoolProp
// commit ea27c63, CoolProp's reference offsets included): p to 2e-10
// relative (except water's triple point, whose stored p is 6e-6 off, NOTES.md
// section 5), h to 2e-8 J/mol, s to 1e-10 J/(mol K) (the agreement NOTES.md
// reports for an independent evaluator). Fluids whose offset New drops are
// rebuilt with it for this test.
func TestCoolPropCheckStates(t *testing.T) {
	for _, name := range Names() {
		sp := specs[name]
		sp.dropOffset = false
		f, err := build(name, sp)
		if err != nil {
			t.Fatal(err)
		}
		if len(f.checks) == 0 {
			t.Fatalf("%s: no check states", name)
		}
		M := f.m
		for key, c := range f.checks {
			s, err := f.StateTRho(c.T, c.Rho*M)
			if err != nil {
				t.Fatalf("%s %s: %v", name, key, err)
			}
			if !(name == "water-iapws95" && key != "hs_anchor") {
				if d := relDiff(s.P, c.P); d > 2e-10 {
					t.Errorf("%s %s: p %.12g, CoolProp %.12g (rel %.2g)", name, key, s.P, c.P, d)
				}
			}
			if d := math.Abs(s.H*M - c.H); d > 2e-8 {
				t.Errorf("%s %s: h %.12g J/mol, CoolProp %.12g", name, key, s.H*M, c.H)
			}
			if d := math.Abs(s.S*M - c.S); d > 1e-10 {
				t.Errorf("%s %s: s %.14g J/(mol K), CoolProp %.14g", name, key, s.S*M, c.S)
			}
		}
	}
}

// TestReferenceStates checks each fluid's stated zero of h and s (values from
// testdata/reference/eos/NOTES.md section 5, computed there by an
// independent evaluator from the same files; ammonia-1993 from python3-iapws
// 1.5.2, quoted in ammonia.json).
func TestReferenceStates(t *testing.T) {
	cases := []struct {
		fluid      string
		T          float64 // saturated liquid at T (0: at p below)
		p          float64
		h, s       float64 // kJ/kg, kJ/(kg K)
		htol, stol float64
		source     string
	}{
		{"r134a", 273.15, 0, 199.99999, 1.000000, 1e-5, 1e-6, "NOTES.md section 5 (IIR, computed: 199.99999, 1.000000)"},
		{"co2", 273.15, 0, 200.000000, 1.000000, 1e-6, 1e-6, "NOTES.md section 5 (IIR offset, computed: 200.000000, 1.000000)"},
		{"ammonia-1993", 273.15, 0, 200.00007, 1.0000004, 1e-5, 1e-7, "python3-iapws 1.5.2 via ammonia.json reference_state"},
		{"ammonia", 273.15, 0, 345.675, 1.48349, 1e-3, 1e-5, "NOTES.md section 5 (Gao 2023 at 273.15 K liquid: 345.675, 1.48349)"},
		{"methane", 0, 101325, 0, 0, 1e-6, 1e-6, "NOTES.md section 5 (NBP offset, computed 0.000000 at 111.6672 K)"},
		{"water-iapws95", 273.16, 0, 0.000612, 0, 1e-6, 1e-9, "IAPWS-95 convention u = s = 0 for saturated liquid at the triple point (h = p v)"},
	}
	for _, c := range cases {
		f := mustNew(t, c.fluid)
		var l thermo.State
		var err error
		if c.T > 0 {
			l, _, err = f.Saturated(c.T)
		} else {
			l, err = f.Flash(thermo.PX, c.p, 0)
		}
		if err != nil {
			t.Fatalf("%s: %v", c.fluid, err)
		}
		if math.Abs(l.H/1e3-c.h) > c.htol || math.Abs(l.S/1e3-c.s) > c.stol {
			t.Errorf("%s: saturated liquid h = %.9g kJ/kg, s = %.9g kJ/(kg K); want %g, %g (%s)", c.fluid, l.H/1e3, l.S/1e3, c.h, c.s, c.source)
		}
	}
	// Nitrogen: ideal gas h = 8670 J/mol, s = 191.5 J/(mol K) at 298.15 K,
	// 101.325 kPa (NOTES.md section 5, rounded there). Air: the published
	// constants give ideal gas h = 8649.34 J/mol, s = 198.686 J/(mol K).
	for _, c := range []struct {
		fluid      string
		h, s       float64
		htol, stol float64
	}{{"nitrogen", 8670, 191.5, 1, 0.1}, {"air-helmholtz", 8649.34, 198.686, 0.01, 0.001}} {
		f := mustNew(t, c.fluid)
		T := 298.15
		rho := 101325 / (f.r * T) * 1e-9 // near-zero density: ideal gas
		s, err := f.StateTRho(T, rho)
		if err != nil {
			t.Fatal(err)
		}
		// ideal-gas s at 101.325 kPa: s(rho) + R ln(rho R T / p0)
		sIG := s.S + f.r*math.Log(rho*f.r*T/101325)
		if math.Abs(s.H*f.m-c.h) > c.htol || math.Abs(sIG*f.m-c.s) > c.stol {
			t.Errorf("%s ideal gas at 298.15 K: h %.8g J/mol, s %.8g J/(mol K); NOTES.md: %g, %g", c.fluid, s.H*f.m, sIG*f.m, c.h, c.s)
		}
	}
}

// TestAmmoniaGaoVsTillnerRoth compares the two ammonia equations at equal T
// and p (python3-iapws's 1993 states). Different equations, so only the
// loose agreement that NOTES.md section 6 reports for an independent
// evaluator: density within 0.05 % (0.3 % at 600 K, 24 MPa), cp within
// 1.3 %, w within 1.4 %, h and s after removing the constant reference-state
// shift (taken at the first row, 240 K liquid) within 0.5 kJ/kg and
// 0.0012 kJ/(kg K) up to 500 K (6.8 kJ/kg, 0.013 kJ/(kg K) at 600 K).
func TestAmmoniaGaoVsTillnerRoth(t *testing.T) {
	gao := mustNew(t, "ammonia")
	first := true
	var dh0, ds0 float64
	for _, r := range readCSV(t, filepath.Join("eos", "pure_fluid_crosscheck.csv")) {
		if r["fluid"] != "ammonia" {
			continue
		}
		T, p := num(t, r, "T_K"), num(t, r, "p_MPa")*1e6
		s, err := gao.Flash(thermo.PT, p, T)
		if err != nil {
			t.Errorf("T=%g p=%g: %v", T, p, err)
			continue
		}
		dh, ds := s.H/1e3-num(t, r, "h_kJ_kg"), s.S/1e3-num(t, r, "s_kJ_kgK")
		if first {
			dh0, ds0, first = dh, ds, false
		}
		hTol, sTol := 0.5, 0.0012
		if T > 500 {
			hTol, sTol = 7.0, 0.014 // NOTES: 6.8, 0.013 (rounded; 6.8 and 0.0134 here)
		}
		if math.Abs(dh-dh0) > hTol || math.Abs(ds-ds0) > sTol {
			t.Errorf("T=%g p=%g: h shift %.4g kJ/kg (first row %.4g), s shift %.5g (first row %.5g)", T, p, dh, dh0, ds, ds0)
		}
		rhoTol := 5e-4
		if T == 600 {
			rhoTol = 3e-3
		}
		if d := relDiff(s.Rho, num(t, r, "rho_kg_m3")); d > rhoTol {
			t.Errorf("T=%g p=%g: rho %.6g vs 1993 %.6g (rel %.2g)", T, p, s.Rho, num(t, r, "rho_kg_m3"), d)
		}
		if d := relDiff(s.Cp/1e3, num(t, r, "cp_kJ_kgK")); d > 0.013 {
			t.Errorf("T=%g p=%g: cp %.6g vs 1993 %.6g (rel %.2g)", T, p, s.Cp/1e3, num(t, r, "cp_kJ_kgK"), d)
		}
		if d := relDiff(s.W, num(t, r, "w_m_s")); d > 0.015 { // NOTES: "1.4 %" (rounded; 1.42 % at 250 K)
			t.Errorf("T=%g p=%g: w %.6g vs 1993 %.6g (rel %.2g)", T, p, s.W, num(t, r, "w_m_s"), d)
		}
	}
}

// TestWaterTripleAndCritical: two IAPWS-95 numbers NOTES.md section 5 quotes
// as agreed between the equation, python3-iapws 1.5.2 and an independent
// evaluator: the Maxwell saturation pressure at 273.16 K, 611.654771 Pa, and
// h = 37548.435 J/mol at the critical point (647.096 K, 322 kg/m3).
func TestWaterTripleAndCritical(t *testing.T) {
	f := mustNew(t, "water-iapws95")
	p, err := f.SatP(273.16)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p-611.654771) > 5e-7 {
		t.Errorf("p_sat(273.16 K) = %.9f Pa, want 611.654771", p)
	}
	s, err := f.StateTRho(647.096, 322)
	if err != nil {
		t.Fatal(err)
	}
	if h := s.H * f.MolarMass(); math.Abs(h-37548.435) > 5e-4 {
		t.Errorf("h at the critical point = %.4f J/mol, want 37548.435", h)
	}
	if math.Abs(s.P-22.064e6) > 1 {
		t.Errorf("p at the critical point = %.3f Pa, want 22.064 MPa (IAPWS-95 critical pressure)", s.P)
	}
}
