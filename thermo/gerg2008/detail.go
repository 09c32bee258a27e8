package gerg2008

import (
	_ "embed"
	"encoding/json"
	"fmt"
	"math"
	"sync"
)

// Reference: AGA Report No. 8 (1992/1994), detail characterisation method
// AGA8-DC92; ISO 20765-1; AGA Report No. 8 Part 1 (2017). The 58 terms
// (a_n, b_n, c_n, k_n, u_n and the g, q, f, s, w flags), the characterisation
// parameters E, K, G, Q, F, S, W of the 21 components, the binary E_ij, U_ij,
// K_ij, G_ij and the ideal-gas terms are read from data/aga8_detail.json,
// transcribed from NIST's AGA8 repository (github.com/usnistgov/AGA8 commit
// 3bdb9ab, AGA8CODE/C/Detail.cpp, SetupDetail); equations as written out in
// testdata/reference/eos/NOTES.md section 3.
//
//go:embed data/aga8_detail.json
var rawDetail []byte

// NameDetail is the config name of the AGA8-DC92 DETAIL model.
const NameDetail = "natural-gas-detail"

// Range accepted by NewDetail: 143-676 K, p <= 280 MPa, the wider range of
// AGA Report No. 8 as recalled in testdata/reference/eos/NOTES.md (from
// memory, not verified there); the stated 0.1 % uncertainty in Z holds only
// for 250-350 K and p <= 12 MPa.
const (
	TMinDetail = 143.0
	TMaxDetail = 676.0
	PMaxDetail = 280e6
)

type detailFile struct {
	R     float64 `json:"gas_constant_J_per_mol_K"`
	Terms []struct {
		N             int     `json:"n"`
		A, B, C, K, U float64 // a_n, b_n, c_n, k_n, u_n
		G, Q, F, S, W float64 // flags 0/1
	} `json:"terms"`
	Components []struct {
		Name     string  `json:"name"`
		M        float64 `json:"molar_mass_g_per_mol"`
		E        float64 `json:"E_K"`
		K        float64 `json:"K_dm3_per_mol_cuberoot"`
		G, Q, F  float64
		S, W     float64
		IdealGas struct {
			N1     float64    `json:"n1"`
			N2     float64    `json:"n2_K"`
			N3     float64    `json:"n3_cp0_over_R"`
			N4     float64    `json:"n4"`
			N5     float64    `json:"n5"`
			N6     float64    `json:"n6"`
			N7     float64    `json:"n7"`
			Theta0 [4]float64 `json:"theta0_K"`
		} `json:"ideal_gas"`
	} `json:"components"`
	Binary []struct {
		I, J       string
		E, U, K, G float64
	} `json:"binary"`
}

type detailTerm struct {
	a, u          float64
	b, k          int
	c             bool
	g, q, f, s, w bool
}

type detailComp struct {
	M                float64
	E, K, G, Q, F, S float64
	W                float64
	ig               idealComp // x and lnx unset
}

type detailData struct {
	R                  float64
	terms              [58]detailTerm
	comps              [nComp]detailComp // published (GERG-2008) order
	eij, uij, kij, gij [nComp][nComp]float64
}

var (
	detailOnce sync.Once
	detailD    *detailData
	detailErr  error
)

func loadDetail() (*detailData, error) {
	detailOnce.Do(func() { detailD, detailErr = parseDetail(rawDetail) })
	return detailD, detailErr
}

func parseDetail(raw []byte) (*detailData, error) {
	var f detailFile
	if err := json.Unmarshal(raw, &f); err != nil {
		return nil, fmt.Errorf("gerg2008: embedded DETAIL data: %w", err)
	}
	if len(f.Terms) != 58 || len(f.Components) != nComp || !(f.R > 8 && f.R < 9) {
		return nil, fmt.Errorf("gerg2008: embedded DETAIL data: %d terms, %d components, R = %g", len(f.Terms), len(f.Components), f.R)
	}
	d := &detailData{R: f.R}
	for n, t := range f.Terms {
		if t.N != n+1 || !isInt(t.B) || !isInt(t.K) || t.B < 0 || t.B >= maxDelta || t.K < 0 || t.K >= maxC || (t.C != 0) != (t.K > 0) {
			return nil, fmt.Errorf("gerg2008: DETAIL term %d: b = %g, c = %g, k = %g", n+1, t.B, t.C, t.K)
		}
		d.terms[n] = detailTerm{a: t.A, u: t.U, b: int(t.B), k: int(t.K), c: t.C != 0,
			g: t.G != 0, q: t.Q != 0, f: t.F != 0, s: t.S != 0, w: t.W != 0}
	}
	const T0 = 298.15
	d0 := 101.325 / (f.R * T0)
	seen := [nComp]bool{}
	for _, c := range f.Components {
		i, ok := aliasIndex[normName(c.Name)]
		if !ok || seen[i] {
			return nil, fmt.Errorf("gerg2008: DETAIL component %q unknown or repeated", c.Name)
		}
		seen[i] = true
		w := c.IdealGas
		d.comps[i] = detailComp{M: c.M, E: c.E, K: c.K, G: c.G, Q: c.Q, F: c.F, S: c.S, W: c.W,
			ig: idealComp{N1: w.N1 - math.Log(d0), N2: w.N2, N3: w.N3 - 1,
				nh: [4]float64{w.N4, w.N5, w.N6, w.N7}, th: w.Theta0}}
	}
	for i := range nComp {
		for j := range nComp {
			d.eij[i][j], d.uij[i][j], d.kij[i][j], d.gij[i][j] = 1, 1, 1, 1
		}
	}
	for _, b := range f.Binary {
		i, ok1 := aliasIndex[normName(b.I)]
		j, ok2 := aliasIndex[normName(b.J)]
		if !ok1 || !ok2 || i == j {
			return nil, fmt.Errorf("gerg2008: DETAIL binary %q-%q unknown", b.I, b.J)
		}
		for _, p := range [2][2]int{{i, j}, {j, i}} {
			d.eij[p[0]][p[1]], d.uij[p[0]][p[1]], d.kij[p[0]][p[1]], d.gij[p[0]][p[1]] = b.E, b.U, b.K, b.G
		}
	}
	return d, nil
}

// NewDetail returns the AGA8-DC92 DETAIL model (ISO 20765-1) of a natural
// gas, with the same composition rules, API and phase checks as New; its
// Name is "natural-gas-detail". It is the older, narrower equation (0.1 %
// in Z for 250-350 K, p <= 12 MPa; accepted here for 143-676 K, p <= 280
// MPa), kept as a cross-check of GERG-2008. Stable and WithStabilityCheck
// are not available for it (Stable returns an error).
//
// DETAIL's residual part is mapped onto the term form of GERG-2008 with
// tau = (1 K)/T and delta = K^3 D:
// alpha_r = sum_{n<=18} (B_n/K^3) tau^u_n delta - sum_{13<=n<=18} C_n tau^u_n delta
// + sum_{n>=13} C_n tau^u_n delta^b_n exp(-c_n delta^k_n).
func NewDetail(composition map[string]float64) (*Mixture, error) {
	d, err := loadDetail()
	if err != nil {
		return nil, err
	}
	g, err := loadData() // critical data for the liquid-like check
	if err != nil {
		return nil, err
	}
	x, err := normalise(composition)
	if err != nil {
		return nil, err
	}
	m := &Mixture{x: x, rgas: d.R, name: NameDetail, tMin: TMinDetail, tMax: TMaxDetail, pMax: PMaxDetail,
		rangeCtx: "AGA8-DC92 DETAIL wide range 143-676 K, p <= 280 MPa", detail: true}
	// Mixing rules (NOTES.md section 3).
	var k5, u5, G, Q, F float64
	var sumK, sumU float64
	var Bn [18]float64
	var vpc float64
	for i := range nComp {
		if x[i] == 0 {
			continue
		}
		ci := &d.comps[i]
		m.mg += x[i] * ci.M
		sumK += x[i] * math.Pow(ci.K, 2.5)
		sumU += x[i] * math.Pow(ci.E, 2.5)
		G += x[i] * ci.G
		Q += x[i] * ci.Q
		F += x[i] * x[i] * ci.F
		m.tLiq += x[i] * g.comps[i].Tc // Kay's rule pseudo-critical temperature
		vpc += x[i] / g.comps[i].Dc
		for j := range nComp {
			if x[j] == 0 {
				continue
			}
			cj := &d.comps[j]
			if j > i {
				k5 += 2 * x[i] * x[j] * (math.Pow(d.kij[i][j], 5) - 1) * math.Pow(ci.K*cj.K, 2.5)
				u5 += 2 * x[i] * x[j] * (math.Pow(d.uij[i][j], 5) - 1) * math.Pow(ci.E*cj.E, 2.5)
				G += x[i] * x[j] * (d.gij[i][j] - 1) * (ci.G + cj.G)
			}
			eij, gij := d.eij[i][j], d.gij[i][j]
			if i == j {
				eij, gij = 1, 1
			}
			for n := 0; n < 18; n++ {
				t := &d.terms[n]
				bs := 1.0
				if t.g {
					bs *= gij * (ci.G + cj.G) / 2
				}
				if t.q {
					bs *= ci.Q * cj.Q
				}
				if t.f {
					bs *= ci.F * cj.F
				}
				if t.s {
					bs *= ci.S * cj.S
				}
				if t.w {
					bs *= ci.W * cj.W
				}
				Bn[n] += x[i] * x[j] * t.a * math.Pow(eij*math.Sqrt(ci.E*cj.E), t.u) * math.Pow(ci.K*cj.K, 1.5) * bs
			}
		}
		ig := ci.ig
		ig.x, ig.lnx = x[i], math.Log(x[i])
		m.ig = append(m.ig, ig)
	}
	K3 := math.Pow(sumK*sumK+k5, 0.6)
	U := math.Pow(sumU*sumU+u5, 0.2)
	if !(K3 > 0) || !(U > 0) || math.IsInf(K3, 0) || math.IsInf(U, 0) {
		return nil, fmt.Errorf("%w: DETAIL mixing rules give K^3 = %g, U = %g", ErrComposition, K3, U)
	}
	m.tr, m.dr = 1, 1/K3
	m.dLiq = 1 / vpc
	// Merge the terms as buildTerms does: key (d, c, t).
	type key struct {
		d, c int
		t    float64
	}
	coef := map[key]float64{}
	var order []key
	add := func(k key, v float64) {
		if _, ok := coef[k]; !ok {
			order = append(order, k)
		}
		coef[k] += v
	}
	for n := 0; n < 58; n++ {
		t := &d.terms[n]
		if n < 18 {
			add(key{1, 0, t.u}, Bn[n]/K3)
		}
		if n < 12 {
			continue
		}
		Cn := t.a * math.Pow(U, t.u)
		if t.g {
			Cn *= G
		}
		if t.q {
			Cn *= Q * Q
		}
		if t.f {
			Cn *= F
		}
		if n < 18 {
			add(key{1, 0, t.u}, -Cn)
		}
		c := 0
		if t.c {
			c = t.k
		}
		add(key{t.b, c, t.u}, Cn)
	}
	ts := &terms{}
	for pass := 0; pass < 2; pass++ { // polynomial terms first, then exp(-delta^c)
		for _, k := range order {
			if (k.c > 0) != (pass == 1) {
				continue
			}
			ts.list = append(ts.list, term{n: coef[k], t: k.t, d: k.d, c: k.c, e: -1})
			if k.c == 0 {
				ts.nPoly++
			} else {
				ts.nExp++
				if !ts.usedC[k.c] {
					ts.usedC[k.c] = true
					ts.cList = append(ts.cList, k.c)
				}
			}
			ts.maxD = max(ts.maxD, k.d)
		}
	}
	if err := ts.indexT(); err != nil {
		return nil, err
	}
	if len(ts.list) > maxTerms {
		return nil, fmt.Errorf("gerg2008: DETAIL: %d merged terms exceed %d", len(ts.list), maxTerms)
	}
	m.ts = ts
	m.prepareIdeal()
	m.tLoop = m.loopFreeTemperature()
	return m, nil
}
