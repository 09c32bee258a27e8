package gerg2008

import (
	_ "embed"
	"encoding/json"
	"fmt"
	"math"
	"sync"
)

// Reference: O. Kunz and W. Wagner, "The GERG-2008 Wide-Range Equation of
// State for Natural Gases and Other Mixtures: An Expansion of GERG-2004",
// J. Chem. Eng. Data 57 (2012) 3032-3091, doi:10.1021/je300655b; ISO 20765-2.
// Every coefficient (critical data, molar masses, pure-fluid residual terms
// of Table A3-A5 form, ideal-gas terms, the 210 binary reducing-parameter sets
// of Table A6, the F_ij of Table A7 and the departure functions of Table A8)
// is read from data/gerg2008.json, transcribed from NIST's AGA8 repository
// (github.com/usnistgov/AGA8 commit 3bdb9ab, AGA8CODE/C/GERG2008.cpp,
// SetupGERG); see data/SOURCE.md and testdata/reference/eos/NOTES.md.
//
//go:embed data/gerg2008.json
var rawData []byte

// nComp is the number of GERG-2008 components.
const nComp = 21

// Fixed upper bounds of the per-mixture term lists; they let a (p,T)
// evaluation keep its tau-dependent coefficients in arrays on the stack.
// load checks that the data fit.
const (
	maxDelta  = 10  // bound on integer delta exponents d (GERG-2008 uses up to 7, DETAIL up to 9)
	maxC      = 8   // largest integer c in exp(-delta^c) (GERG-2008 uses up to 6)
	maxTerms  = 256 // merged pure-fluid and polynomial departure terms
	maxDep    = 64  // merged exponential departure terms
	maxDepExp = 48  // distinct departure exponents
	maxGroups = 96  // (d, c, e) groups of merged terms
	maxFrac   = 64  // distinct fractional parts of the tau exponents (else exp(t ln tau) per exponent)
	maxIntPow = 63  // largest |floor(t)| of a tau exponent for integer powers (else exp(t ln tau))
)

type jsonFile struct {
	Source     string  `json:"source"`
	R          float64 `json:"gas_constant_J_per_mol_K"`
	Rstar      float64 `json:"ideal_gas_R_star_J_per_mol_K"`
	Components []struct {
		Index    int     `json:"index"`
		Name     string  `json:"name"`
		Formula  string  `json:"formula"`
		M        float64 `json:"molar_mass_g_per_mol"`
		Tc       float64 `json:"Tc_K"`
		Dc       float64 `json:"rhoc_mol_per_dm3"`
		Residual struct {
			Kpol int       `json:"K_pol"`
			Kexp int       `json:"K_exp"`
			N    []float64 `json:"n"`
			D    []float64 `json:"d"`
			T    []float64 `json:"t"`
			C    []float64 `json:"c"`
		} `json:"residual"`
		IdealGas struct {
			Working struct {
				N1     float64    `json:"n1"`
				N2     float64    `json:"n2_K"`
				N3     float64    `json:"n3_cp0_over_Rstar"`
				N4     float64    `json:"n4"`
				N5     float64    `json:"n5"`
				N6     float64    `json:"n6"`
				N7     float64    `json:"n7"`
				Theta0 [4]float64 `json:"theta0_K"`
			} `json:"nist_working_form"`
		} `json:"ideal_gas"`
	} `json:"components"`
	Binary []struct {
		I      string  `json:"i"`
		J      string  `json:"j"`
		BetaV  float64 `json:"beta_v"`
		GammaV float64 `json:"gamma_v"`
		BetaT  float64 `json:"beta_T"`
		GammaT float64 `json:"gamma_T"`
	} `json:"binary_reducing"`
	DepPairs []struct {
		I        string  `json:"i"`
		J        string  `json:"j"`
		F        float64 `json:"F"`
		Function string  `json:"function"`
	} `json:"departure_pairs"`
	DepFuncs map[string]struct {
		Kpol    int       `json:"K_pol"`
		Kexp    int       `json:"K_exp"`
		N       []float64 `json:"n"`
		D       []float64 `json:"d"`
		T       []float64 `json:"t"`
		Eta     []float64 `json:"eta"`
		Epsilon []float64 `json:"epsilon"`
		Beta    []float64 `json:"beta"`
		Gamma   []float64 `json:"gamma"`
	} `json:"departure_functions"`
}

// pureTerm is one term n delta^d tau^t [exp(-delta^c)] of a pure-fluid
// residual equation (c = 0: polynomial term).
type pureTerm struct {
	n, t float64
	d, c int
}

// depTerm is one term of a departure function: n delta^d tau^t, times
// exp(-eta (delta-epsilon)^2 - beta (delta-gamma)) when exp is true.
type depTerm struct {
	n, t                  float64
	d                     int
	exp                   bool
	eta, eps, beta, gamma float64
}

// component holds one fluid's constants in NIST's units (K, mol/dm3, g/mol).
type component struct {
	name, formula string
	M             float64 // molar mass, g/mol
	Tc, Dc        float64 // critical temperature K and density mol/dm3
	terms         []pureTerm
	// Ideal-gas part in NIST's working form, already multiplied by R*/R:
	// alpha0 = ln D + N1 + N2/T - N3 ln T + sum_k sgn_k nh_k ln f_k(th_k/T),
	// f = |sinh| for k = 0, 2 and cosh for k = 1, 3 (sgn -1 for cosh).
	N1, N2, N3 float64
	nh, th     [4]float64 // th in K; th = 0 means the term is absent
}

// gergData is the parsed coefficient set.
type gergData struct {
	R     float64 // molar gas constant of the equation, J/(mol K)
	comps [nComp]component
	// Reducing parameters for the ordered pair (i, j), i < j in published
	// order; the asymmetric beta belongs to that order.
	betaV, gammaV, betaT, gammaT [nComp][nComp]float64
	// Departure function: depF[i][j] = F_ij (0 if none), depFn[i][j] index into funcs.
	depF  [nComp][nComp]float64
	depFn [nComp][nComp]int
	funcs [][]depTerm
	index map[string]int // canonical name -> position
}

var (
	dataOnce sync.Once
	data     *gergData
	dataErr  error
)

// loadData parses the embedded coefficients once.
func loadData() (*gergData, error) {
	dataOnce.Do(func() { data, dataErr = parse(rawData) })
	return data, dataErr
}

func isInt(v float64) bool { return v == math.Trunc(v) && math.Abs(v) < 1e6 }

func parse(raw []byte) (*gergData, error) {
	var f jsonFile
	if err := json.Unmarshal(raw, &f); err != nil {
		return nil, fmt.Errorf("gerg2008: embedded data: %w", err)
	}
	if len(f.Components) != nComp {
		return nil, fmt.Errorf("gerg2008: embedded data has %d components, want %d", len(f.Components), nComp)
	}
	g := &gergData{R: f.R, index: make(map[string]int, nComp)}
	if !(g.R > 8 && g.R < 9) || !(f.Rstar > 8 && f.Rstar < 9) {
		return nil, fmt.Errorf("gerg2008: embedded data: implausible gas constants %g, %g", f.R, f.Rstar)
	}
	rsr := f.Rstar / f.R
	const T0 = 298.15 // K, ideal-gas reference temperature (NIST GERG2008.cpp)
	d0 := 101.325 / (g.R * T0)
	for i, jc := range f.Components {
		if jc.Index != i+1 {
			return nil, fmt.Errorf("gerg2008: component %q has index %d at position %d", jc.Name, jc.Index, i+1)
		}
		c := &g.comps[i]
		c.name, c.formula, c.M, c.Tc, c.Dc = jc.Name, jc.Formula, jc.M, jc.Tc, jc.Dc
		r := jc.Residual
		nt := len(r.N)
		if nt != r.Kpol+r.Kexp || len(r.D) != nt || len(r.T) != nt || len(r.C) != nt {
			return nil, fmt.Errorf("gerg2008: %s: inconsistent residual term arrays", jc.Name)
		}
		for k := 0; k < nt; k++ {
			if !isInt(r.D[k]) || !isInt(r.C[k]) || r.D[k] < 0 || r.D[k] >= maxDelta || r.C[k] < 0 || r.C[k] >= maxC {
				return nil, fmt.Errorf("gerg2008: %s term %d: d = %g, c = %g not small non-negative integers", jc.Name, k+1, r.D[k], r.C[k])
			}
			if (k < r.Kpol) != (r.C[k] == 0) {
				return nil, fmt.Errorf("gerg2008: %s term %d: c = %g does not match K_pol = %d", jc.Name, k+1, r.C[k], r.Kpol)
			}
			c.terms = append(c.terms, pureTerm{n: r.N[k], t: r.T[k], d: int(r.D[k]), c: int(r.C[k])})
		}
		w := jc.IdealGas.Working
		// NIST GERG2008.cpp SetupGERG: n3 -> n3 - 1; all n scaled by R*/R;
		// N1 = (R*/R) n1 - ln d0, N2 = (R*/R)(n2 + T0) - T0.
		c.N1 = rsr*w.N1 - math.Log(d0)
		c.N2 = rsr*(w.N2+T0) - T0
		c.N3 = rsr * (w.N3 - 1)
		c.nh = [4]float64{rsr * w.N4, rsr * w.N5, rsr * w.N6, rsr * w.N7}
		c.th = w.Theta0
		if _, dup := g.index[c.name]; dup {
			return nil, fmt.Errorf("gerg2008: duplicate component %q", c.name)
		}
		g.index[c.name] = i
	}
	for i := range nComp {
		for j := range nComp {
			g.betaV[i][j], g.gammaV[i][j], g.betaT[i][j], g.gammaT[i][j] = 1, 1, 1, 1
			g.depFn[i][j] = -1
		}
	}
	seen := 0
	for _, b := range f.Binary {
		i, ok1 := g.index[b.I]
		j, ok2 := g.index[b.J]
		if !ok1 || !ok2 || i == j {
			return nil, fmt.Errorf("gerg2008: binary pair %q-%q: unknown component", b.I, b.J)
		}
		bv, bt := b.BetaV, b.BetaT
		if i > j { // store in index order: swapping i and j turns beta into 1/beta
			i, j = j, i
			bv, bt = 1/bv, 1/bt
		}
		if !(bv > 0 && bt > 0 && b.GammaV > 0 && b.GammaT > 0) {
			return nil, fmt.Errorf("gerg2008: binary pair %q-%q: non-positive parameter", b.I, b.J)
		}
		g.betaV[i][j], g.gammaV[i][j], g.betaT[i][j], g.gammaT[i][j] = bv, b.GammaV, bt, b.GammaT
		seen++
	}
	if seen != nComp*(nComp-1)/2 {
		return nil, fmt.Errorf("gerg2008: %d binary reducing pairs, want %d", seen, nComp*(nComp-1)/2)
	}
	fnIndex := map[string]int{}
	for name, fn := range f.DepFuncs {
		nt := len(fn.N)
		if nt != fn.Kpol+fn.Kexp || len(fn.D) != nt || len(fn.T) != nt || len(fn.Eta) != nt ||
			len(fn.Epsilon) != nt || len(fn.Beta) != nt || len(fn.Gamma) != nt {
			return nil, fmt.Errorf("gerg2008: departure function %q: inconsistent arrays", name)
		}
		var terms []depTerm
		for k := 0; k < nt; k++ {
			if !isInt(fn.D[k]) || fn.D[k] < 0 || fn.D[k] >= maxDelta {
				return nil, fmt.Errorf("gerg2008: departure function %q term %d: d = %g", name, k+1, fn.D[k])
			}
			terms = append(terms, depTerm{n: fn.N[k], t: fn.T[k], d: int(fn.D[k]), exp: k >= fn.Kpol,
				eta: fn.Eta[k], eps: fn.Epsilon[k], beta: fn.Beta[k], gamma: fn.Gamma[k]})
		}
		fnIndex[name] = len(g.funcs)
		g.funcs = append(g.funcs, terms)
	}
	for _, p := range f.DepPairs {
		i, ok1 := g.index[p.I]
		j, ok2 := g.index[p.J]
		k, ok3 := fnIndex[p.Function]
		if !ok1 || !ok2 || !ok3 || i == j {
			return nil, fmt.Errorf("gerg2008: departure pair %q-%q (%q): unknown name", p.I, p.J, p.Function)
		}
		if i > j {
			i, j = j, i
		}
		g.depF[i][j], g.depFn[i][j] = p.F, k
	}
	// Bounds of the merged per-mixture lists (all components present).
	var x [nComp]float64
	for i := range x {
		x[i] = 1.0 / nComp
	}
	if _, err := buildTerms(g, &x); err != nil {
		return nil, err
	}
	return g, nil
}
