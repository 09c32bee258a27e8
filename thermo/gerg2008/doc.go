// Package gerg2008 implements the GERG-2008 wide-range equation of state for
// natural gases and other mixtures of 21 components (O. Kunz and W. Wagner,
// J. Chem. Eng. Data 57 (2012) 3032-3091, doi:10.1021/je300655b; ISO
// 20765-2; AGA Report No. 8 Part 2) behind the thermo.Fluid API.
//
// New builds a Mixture from mole fractions; everything that depends on the
// composition (reducing functions, the residual terms of all components and
// binary departure functions merged into one term list with
// composition-weighted coefficients, the ideal-gas part) is computed there,
// so that a Flash allocates nothing. The coefficients are embedded from
// data/gerg2008.json (see data/SOURCE.md) and parsed once.
//
// Units are SI at the API (Pa, K, J/kg, J/(kg K), kg/m3; Properties is molar:
// mol/m3, J/mol); inside, the package works in NIST's units (kPa, mol/dm3)
// so that the published check values are reproduced to rounding.
//
// Validity: the extended range of the equation, 60-700 K and p <= 70 MPa, is
// accepted; InNormalRange tells whether a state is in the normal range
// (90-450 K, p <= 35 MPa) where the stated uncertainty in gas-phase density
// is 0.1 %. Only single-phase gas (vapour-like or dense supercritical)
// states are returned; see Mixture.Flash for the phase checks and
// Mixture.Stable for the tangent-plane stability test.
package gerg2008
