package idealgas

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// R is the molar gas constant in J/(mol·K) (CODATA 2018, exact since the
// 2019 SI redefinition).
const R = 8.314462618

// P0 is the standard-state pressure of the NASA polynomials' entropy, Pa
// (1 bar; GRI-Mech 3.0 thermo30.dat).
const P0 = 1e5

// Atoms counts the atoms of each element in one molecule of a species.
type Atoms struct {
	C, H, O, N, Ar int
}

// Species is one ideal-gas species described by NASA 7-coefficient
// polynomials (dimensionless, per mole):
//
//	cp/R    = a1 + a2 T + a3 T^2 + a4 T^3 + a5 T^4
//	h/(R T) = a1 + a2 T/2 + a3 T^2/3 + a4 T^3/4 + a5 T^4/5 + a6/T
//	s0/R    = a1 ln T + a2 T + a3 T^2/2 + a4 T^3/3 + a5 T^4/4 + a7
//
// with s0 at P0 = 1 bar and h including the enthalpy of formation at
// 298.15 K. Low applies from TLow to TMid, High from TMid to THigh.
type Species struct {
	Name      string     // canonical formula, e.g. "CO2"
	MolarMass float64    // kg/mol
	TLow      float64    // K, lower end of the data's low interval
	TMid      float64    // K, boundary between Low and High
	THigh     float64    // K, upper end of the data's high interval
	TMin      float64    // K, lowest temperature this package accepts (TLow unless an extrapolation is documented in the table)
	Low       [7]float64 // a1..a7 for TMin..TMid
	High      [7]float64 // a1..a7 for TMid..THigh
	Atoms     Atoms
	Source    string // where the numbers come from
}

const (
	sourceGRI30     = "GRI-Mech 3.0 thermo30.dat (Smith et al. 1999), via testdata/reference/nasa7_gri30.csv"
	sourceButaneFit = "cp fitted to the GERG-2008 ideal-gas cp0 (Kunz and Wagner 2012) by thermo/idealgas/testdata/fit_butanes.py; dHf and S at 298.15 K from memory"
)

// speciesTable holds every species this package knows.
//
// Source of every coefficient except the butanes' (see there), molar mass and temperature range:
// GRI-Mech 3.0 thermodynamic data, file thermo30.dat — G.P. Smith,
// D.M. Golden, M. Frenklach, N.W. Moriarty, B. Eiteneer, M. Goldenberg,
// C.T. Bowman, R.K. Hanson, S. Song, W.C. Gardiner Jr., V.V. Lissianski,
// Z. Qin, GRI-Mech 3.0 (1999), http://combustion.berkeley.edu/gri-mech/ —
// as copied into testdata/reference/nasa7_gri30.csv (molar masses there are
// IUPAC standard atomic weights summed). TestSpeciesTableMatchesCSV checks
// that every number below equals that file.
//
// Documented extrapolations below the data's TLow (TMin < TLow), each checked
// by TestExtrapolationBelowTLow against the GERG-2008 ideal-gas cp0 of
// testdata/reference/eos/gerg2008.json:
//   - Ar: cp = 5/2 R exactly (monatomic), so 200 K is as good as 300 K.
//   - N2: the 300-1000 K fit extrapolated to 200 K gives cp 1.1 % low at
//     200 K and 0.6 % low at 250 K (dry air cp0 0.84 % low at 200 K vs
//     Lemmon et al. 2000). Accepted so that ambient air below 27 °C can be
//     evaluated at all; use the Helmholtz air model where that matters.
//   - C3H8: extrapolated to 250 K, cp 1.8 % low at 250 K, 0.7 % low at
//     273.15 K; propane is a few per cent of a natural gas at most.
var speciesTable = []Species{
	{Name: "N2", MolarMass: 28.0134e-3, TLow: 300, TMid: 1000, THigh: 5000, TMin: 200,
		Low:   [7]float64{3.29867700e+00, 1.40824040e-03, -3.96322200e-06, 5.64151500e-09, -2.44485400e-12, -1.02089990e+03, 3.95037200e+00},
		High:  [7]float64{2.92664000e+00, 1.48797680e-03, -5.68476000e-07, 1.00970380e-10, -6.75335100e-15, -9.22797700e+02, 5.98052800e+00},
		Atoms: Atoms{N: 2}, Source: sourceGRI30},
	{Name: "O2", MolarMass: 31.9988e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{3.78245636e+00, -2.99673416e-03, 9.84730201e-06, -9.68129509e-09, 3.24372837e-12, -1.06394356e+03, 3.65767573e+00},
		High:  [7]float64{3.28253784e+00, 1.48308754e-03, -7.57966669e-07, 2.09470555e-10, -2.16717794e-14, -1.08845772e+03, 5.45323129e+00},
		Atoms: Atoms{O: 2}, Source: sourceGRI30},
	{Name: "Ar", MolarMass: 39.948e-3, TLow: 300, TMid: 1000, THigh: 5000, TMin: 200,
		Low:   [7]float64{2.50000000e+00, 0, 0, 0, 0, -7.45375000e+02, 4.36600000e+00},
		High:  [7]float64{2.50000000e+00, 0, 0, 0, 0, -7.45375000e+02, 4.36600000e+00},
		Atoms: Atoms{Ar: 1}, Source: sourceGRI30},
	{Name: "CO2", MolarMass: 44.0095e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{2.35677352e+00, 8.98459677e-03, -7.12356269e-06, 2.45919022e-09, -1.43699548e-13, -4.83719697e+04, 9.90105222e+00},
		High:  [7]float64{3.85746029e+00, 4.41437026e-03, -2.21481404e-06, 5.23490188e-10, -4.72084164e-14, -4.87591660e+04, 2.27163806e+00},
		Atoms: Atoms{C: 1, O: 2}, Source: sourceGRI30},
	{Name: "H2O", MolarMass: 18.01528e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{4.19864056e+00, -2.03643410e-03, 6.52040211e-06, -5.48797062e-09, 1.77197817e-12, -3.02937267e+04, -8.49032208e-01},
		High:  [7]float64{3.03399249e+00, 2.17691804e-03, -1.64072518e-07, -9.70419870e-11, 1.68200992e-14, -3.00042971e+04, 4.96677010e+00},
		Atoms: Atoms{H: 2, O: 1}, Source: sourceGRI30},
	{Name: "CH4", MolarMass: 16.04246e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{5.14987613e+00, -1.36709788e-02, 4.91800599e-05, -4.84743026e-08, 1.66693956e-11, -1.02466476e+04, -4.64130376e+00},
		High:  [7]float64{7.48514950e-02, 1.33909467e-02, -5.73285809e-06, 1.22292535e-09, -1.01815230e-13, -9.46834459e+03, 1.84373180e+01},
		Atoms: Atoms{C: 1, H: 4}, Source: sourceGRI30},
	{Name: "CO", MolarMass: 28.0101e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{3.57953347e+00, -6.10353680e-04, 1.01681433e-06, 9.07005884e-10, -9.04424499e-13, -1.43440860e+04, 3.50840928e+00},
		High:  [7]float64{2.71518561e+00, 2.06252743e-03, -9.98825771e-07, 2.30053008e-10, -2.03647716e-14, -1.41518724e+04, 7.81868772e+00},
		Atoms: Atoms{C: 1, O: 1}, Source: sourceGRI30},
	{Name: "H2", MolarMass: 2.01588e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{2.34433112e+00, 7.98052075e-03, -1.94781510e-05, 2.01572094e-08, -7.37611761e-12, -9.17935173e+02, 6.83010238e-01},
		High:  [7]float64{3.33727920e+00, -4.94024731e-05, 4.99456778e-07, -1.79566394e-10, 2.00255376e-14, -9.50158922e+02, -3.20502331e+00},
		Atoms: Atoms{H: 2}, Source: sourceGRI30},
	{Name: "C2H6", MolarMass: 30.06904e-3, TLow: 200, TMid: 1000, THigh: 3500, TMin: 200,
		Low:   [7]float64{4.29142492e+00, -5.50154270e-03, 5.99438288e-05, -7.08466285e-08, 2.68685771e-11, -1.15222055e+04, 2.66682316e+00},
		High:  [7]float64{1.07188150e+00, 2.16852677e-02, -1.00256067e-05, 2.21412001e-09, -1.90002890e-13, -1.14263932e+04, 1.51156107e+01},
		Atoms: Atoms{C: 2, H: 6}, Source: sourceGRI30},
	{Name: "C3H8", MolarMass: 44.09562e-3, TLow: 300, TMid: 1000, THigh: 5000, TMin: 250,
		Low:   [7]float64{9.33553810e-01, 2.64245790e-02, 6.10597270e-06, -2.19774990e-08, 9.51492530e-12, -1.39585200e+04, 1.92016910e+01},
		High:  [7]float64{7.53413680e+00, 1.88722390e-02, -6.27184910e-06, 9.14756490e-10, -4.78380690e-14, -1.64675160e+04, -1.78923490e+01},
		Atoms: Atoms{C: 3, H: 8}, Source: sourceGRI30},
	// n-C4H10 and i-C4H10 are not in GRI-Mech 3.0: cp fitted by
	// testdata/fit_butanes.py to the GERG-2008 ideal-gas cp0 (Kunz and
	// Wagner 2012, testdata/reference/eos/gerg2008.json) on 200-1000 K with
	// TMid = 450 K, within 0.071 % (n) and 0.086 % (i) of it; integration
	// constants from dHf(298.15 K) and S(298.15 K, 1 bar) FROM MEMORY
	// (n: -125.79 kJ/mol, 310.23 J/(mol K); i: -134.2 kJ/mol,
	// 294.64 J/(mol K)), which matter only for reaction heat balances.
	{Name: "n-C4H10", MolarMass: 58.1222e-3, TLow: 200, TMid: 450, THigh: 1000, TMin: 200,
		Low:   [7]float64{9.231335499e+00, -3.203405591e-02, 2.132165689e-04, -2.956231061e-07, 1.325870228e-10, -1.781970920e+04, -1.286039301e+01},
		High:  [7]float64{-2.621557859e+00, 5.986271889e-02, -4.824617567e-05, 2.377077904e-08, -5.421629801e-12, -1.661348159e+04, 3.638463638e+01},
		Atoms: Atoms{C: 4, H: 10}, Source: sourceButaneFit},
	{Name: "i-C4H10", MolarMass: 58.1222e-3, TLow: 200, TMid: 450, THigh: 1000, TMin: 200,
		Low:   [7]float64{6.128056778e+00, -7.277220259e-03, 1.284928413e-04, -1.536456081e-07, 4.003121776e-11, -1.849468904e+04, -1.741226642e+00},
		High:  [7]float64{-4.146566969e+00, 6.671154375e-02, -5.854449033e-05, 3.059801268e-08, -7.143550457e-12, -1.739589532e+04, 4.155879478e+01},
		Atoms: Atoms{C: 4, H: 10}, Source: sourceButaneFit},
	{Name: "NH3", MolarMass: 17.03052e-3, TLow: 200, TMid: 1000, THigh: 6000, TMin: 200,
		Low:   [7]float64{4.28602740e+00, -4.66052300e-03, 2.17185130e-05, -2.28088870e-08, 8.26380460e-12, -6.74172850e+03, -6.25372770e-01},
		High:  [7]float64{2.63445210e+00, 5.66625600e-03, -1.72786760e-06, 2.38671610e-10, -1.25787860e-14, -6.54469580e+03, 6.56629280e+00},
		Atoms: Atoms{N: 1, H: 3}, Source: sourceGRI30},
}

// speciesIndex maps an upper-case name or alias to an index in speciesTable.
var speciesIndex = func() map[string]int {
	m := make(map[string]int)
	for i, s := range speciesTable {
		m[strings.ToUpper(s.Name)] = i
	}
	// Spellings without the hyphen.
	m["NC4H10"] = m["N-C4H10"]
	m["IC4H10"] = m["I-C4H10"]
	return m
}()

// canonical returns the index of the species called name (case-insensitive
// formula, e.g. "co2", "Ar", "AR", "n-C4H10" or "nC4H10").
func canonical(name string) (int, bool) {
	i, ok := speciesIndex[strings.ToUpper(strings.TrimSpace(name))]
	return i, ok
}

// LookupSpecies returns the species with the given formula
// (case-insensitive).
func LookupSpecies(name string) (Species, error) {
	i, ok := canonical(name)
	if !ok {
		return Species{}, fmt.Errorf("idealgas: unknown species %q (known: %s): %w", name, strings.Join(SpeciesNames(), ", "), ErrComposition)
	}
	return speciesTable[i], nil
}

// SpeciesNames returns the canonical names of all known species, sorted.
func SpeciesNames() []string {
	out := make([]string, len(speciesTable))
	for i, s := range speciesTable {
		out[i] = s.Name
	}
	sort.Strings(out)
	return out
}

// coeffs returns the coefficient set that applies at T (Low below TMid).
func (s *Species) coeffs(T float64) *[7]float64 {
	if T < s.TMid {
		return &s.Low
	}
	return &s.High
}

// CpR returns cp/R (dimensionless, molar) at T in K. T is not range checked.
func (s Species) CpR(T float64) float64 {
	a := s.coeffs(T)
	return a[0] + T*(a[1]+T*(a[2]+T*(a[3]+T*a[4])))
}

// HRT returns h/(R T) (molar, including the enthalpy of formation) at T in K.
func (s Species) HRT(T float64) float64 {
	a := s.coeffs(T)
	return a[0] + T*(a[1]/2+T*(a[2]/3+T*(a[3]/4+T*a[4]/5))) + a[5]/T
}

// SR returns s0/R at T in K and P0 (molar).
func (s Species) SR(T float64) float64 {
	a := s.coeffs(T)
	return a[0]*math.Log(T) + T*(a[1]+T*(a[2]/2+T*(a[3]/3+T*a[4]/4))) + a[6]
}
