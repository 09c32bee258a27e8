// Package idealgas implements ideal-gas species and mixtures from NASA
// 7-coefficient polynomials, dry and humid air, and the products of complete
// combustion of a fuel gas, behind the thermo.Fluid API.
//
// # Data
//
// N2, O2, Ar, CO2, H2O, CH4, C2H6, C3H8, CO, H2 and NH3 come from the
// GRI-Mech 3.0 thermodynamic data (thermo30.dat), copied in
// testdata/reference/nasa7_gri30.csv; n-C4H10 and i-C4H10 are fitted to the
// GERG-2008 ideal-gas cp0 (see speciesTable and testdata/fit_butanes.py).
// Enthalpies include the enthalpy of formation at 298.15 K; entropies are
// absolute (third-law) at P0 = 1 bar. R = 8.314462618 J/(mol K).
//
// # Mixtures
//
// NewMixture takes mole or mass fractions; a *Mixture is a thermo.Fluid
// (Flash with PT, PH, PS, HS; PX and TX return thermo.ErrUnsupported) and
// has direct methods H, S, Cp, TFromH, TFromPS and IsentropicT. All
// properties are per unit mass in SI units; s includes the ideal mixing
// term -Rs sum x_i ln x_i. The valid temperature range is the overlap of
// the species' ranges (TRange; dry air 200-3500 K), pressures from
// MinPressure (1 Pa) to DefaultMaxPressure (10 MPa, changeable with
// WithMaxPressure). Every state has Phase thermo.PhaseGas.
//
// # Named fluids
//
//	DryAir()                          "air"       N2 0.7812, O2 0.2096, Ar 0.0092 by mole (Lemmon et al. 2000)
//	HumidAir(rh, T, p)                "humid-air" x_H2O = rh psat_IF97(T)/p
//	HumidAirDewPoint(Tdew, p)         "humid-air" x_H2O = psat_IF97(Tdew)/p
//	HumidAirRatio(w)                  "humid-air" w kg vapour per kg dry air
//	CombustionProducts(fuel, air, far)            "flue-gas" at a fuel/air mass ratio
//	CombustionProductsExcessAir(fuel, air, e)     "flue-gas" at excess air e (0.1 = 10 %)
//
// A mixture's name can be changed with Named. Mixtures are immutable and
// safe for concurrent use.
package idealgas
