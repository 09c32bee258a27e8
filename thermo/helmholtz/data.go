package helmholtz

import (
	"embed"
	"encoding/json"
	"fmt"
	"sync"
)

// The coefficient files are copies of testdata/reference/eos/*.json (see
// data/README.md). Source of every number: CoolProp repository
// (github.com/CoolProp/CoolProp, commit ea27c6394887390270a03dcd0ad00a1274be4efc),
// dev/fluids/<Fluid>.json, transcribing the papers named in eos[].reference;
// the layout is described in testdata/reference/eos/NOTES.md section 5.
//
//go:embed data/*.json
var dataFS embed.FS

// jsonFile is the top level of one coefficient file.
type jsonFile struct {
	Fluid  string             `json:"fluid"`
	Source string             `json:"source"`
	EOS    []jsonEOS          `json:"eos"`
	Anc    map[string]jsonAnc `json:"ancillaries"`
}

type jsonEOS struct {
	ID        string `json:"id"`
	Reference struct {
		Authors  string  `json:"authors"`
		Title    string  `json:"title"`
		Journal  string  `json:"journal"`
		Pages    string  `json:"pages"`
		Article  string  `json:"article"`
		Year     int     `json:"year"`
		DOI      *string `json:"doi"`
		Validity string  `json:"validity"`
	} `json:"reference"`
	M          float64 `json:"molar_mass_kg_per_mol"`
	R          float64 `json:"gas_constant_J_per_mol_K"`
	PseudoPure bool    `json:"pseudo_pure"`
	Reducing   struct {
		T   float64 `json:"T_K"`
		Rho float64 `json:"rho_mol_per_m3"`
	} `json:"reducing"`
	Critical struct {
		T   float64 `json:"T_K"`
		P   float64 `json:"p_Pa"`
		Rho float64 `json:"rho_mol_per_m3"`
	} `json:"critical"`
	Triple struct {
		T    float64 `json:"T_K"`
		P    float64 `json:"p_Pa"`
		RhoL float64 `json:"rho_liquid_mol_per_m3"`
		RhoV float64 `json:"rho_vapor_mol_per_m3"`
	} `json:"triple"`
	Limits struct {
		Tmin float64 `json:"T_min_K"`
		Tmax float64 `json:"T_max_K"`
		Pmax float64 `json:"p_max_Pa"`
	} `json:"limits"`
	Alphar         []jsonResidual `json:"alphar"`
	Alpha0         []jsonIdeal    `json:"alpha0"`
	ReferenceState struct {
		Offset     *string `json:"coolprop_offset"`
		WithOffset string  `json:"with_offset"`
		Published  string  `json:"published_constants"`
	} `json:"reference_state"`
	Check map[string]jsonCheck `json:"coolprop_check_states"`
}

// jsonResidual holds one residual term list. encoding/json prefers an exact
// key match, so "a"/"A", "b"/"B", "d"/"D" land in their own fields.
type jsonResidual struct {
	Type    string    `json:"type"`
	N       []float64 `json:"n"`
	D       []float64 `json:"d"`
	T       []float64 `json:"t"`
	L       []float64 `json:"l"`
	Eta     []float64 `json:"eta"`
	Epsilon []float64 `json:"epsilon"`
	Beta    []float64 `json:"beta"`
	Gamma   []float64 `json:"gamma"`
	Bsmall  []float64 `json:"b"`
	Asmall  []float64 `json:"a"`
	ACap    []float64 `json:"A"`
	BCap    []float64 `json:"B"`
	CCap    []float64 `json:"C"`
	DCap    []float64 `json:"D"`
}

type jsonIdeal struct {
	Type       string    `json:"type"`
	A1         float64   `json:"a1"`
	A2         float64   `json:"a2"`
	A          float64   `json:"a"`
	N          []float64 `json:"n"`
	T          []float64 `json:"t"`
	Theta      []float64 `json:"theta"`
	C          []float64 `json:"c"`
	D          []float64 `json:"d"`
	Convention string    `json:"convention"`
}

type jsonAnc struct {
	Form    string    `json:"form"`
	Tr      float64   `json:"T_r_K"`
	Reduce  float64   `json:"reducing_value"`
	N       []float64 `json:"n"`
	T       []float64 `json:"t"`
	Tmin    float64   `json:"T_min_K"`
	Tmax    float64   `json:"T_max_K"`
	MaxErrP float64   `json:"max_abs_error_percent"`
}

// jsonCheck is a state CoolProp stores for the equation (molar units).
type jsonCheck struct {
	T   float64 `json:"T_K"`
	P   float64 `json:"p_Pa"`
	Rho float64 `json:"rho_mol_per_m3"`
	H   float64 `json:"h_J_per_mol"`
	S   float64 `json:"s_J_per_mol_K"`
}

var (
	fileMu    sync.Mutex
	fileOnce  = map[string]*sync.Once{}
	fileCache = map[string]*jsonFile{}
	fileErr   = map[string]error{}
)

// loadFile parses an embedded coefficient file once and returns the shared,
// read-only result.
func loadFile(name string) (*jsonFile, error) {
	fileMu.Lock()
	once, ok := fileOnce[name]
	if !ok {
		once = new(sync.Once)
		fileOnce[name] = once
	}
	fileMu.Unlock()
	once.Do(func() {
		b, err := dataFS.ReadFile("data/" + name)
		var jf jsonFile
		if err == nil {
			err = json.Unmarshal(b, &jf)
		}
		if err == nil && len(jf.EOS) == 0 {
			err = fmt.Errorf("no equation of state in file")
		}
		fileMu.Lock()
		if err != nil {
			fileErr[name] = fmt.Errorf("helmholtz: data/%s: %w", name, err)
		} else {
			fileCache[name] = &jf
		}
		fileMu.Unlock()
	})
	fileMu.Lock()
	defer fileMu.Unlock()
	return fileCache[name], fileErr[name]
}
