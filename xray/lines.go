package xray

import (
	"fmt"
	"sort"
	"strings"
)

// Line is one characteristic emission line of an anode element.
type Line struct {
	// Name in the Siegbahn notation, e.g. "Kα1".
	Name string
	// IUPAC transition, e.g. "KL3".
	IUPAC string
	// Photon energy in keV.
	EnergyKeV float64
	// Energy of the edge whose ionisation the line needs (the excitation threshold), keV.
	EdgeKeV float64
	// Shell (or subshell) whose vacancy the line fills: "K", "L2", "L3".
	Shell string
	// Photons of this line per vacancy in Shell: fluorescence yield ω × radiative fraction of the transition.
	PerVacancy float64
	// Relative intensity within the element's line family at equal excitation (strongest = 1).
	Relative float64
}

// WavelengthNM is the line's wavelength.
func (l Line) WavelengthNM() float64 { return WavelengthOfEnergyNM(l.EnergyKeV) }

// ShellElectrons is the number of electrons in the line's shell when full (K 2, L1 2, L2 2, L3 4): at equal
// overvoltage, a thick target ionises a shell roughly in proportion to its occupancy.
func (l Line) ShellElectrons() int {
	if l.Shell == "L3" {
		return 4
	}
	return 2
}

// Anode is an X-ray tube target element.
type Anode struct {
	Symbol string
	Z      int
	// K-shell ionisation energy (K absorption edge), keV.
	KEdgeKeV float64
	Lines    []Line
}

// Energies and K edges: NIST SRD 128, X-ray Transition Energies (Deslattes et al., Rev. Mod. Phys. 75, 35,
// 2003), direct experimental values; Cr–Cu Kβ1 are KM2/KM3 blends there, so the Kβ1 line here carries the
// unresolved Kβ1,3 (KM3 + KM2) intensity.
//
// Intensities: radiative rates of Scofield (At. Data Nucl. Data Tables 14, 121, 1974) and fluorescence
// yields of Krause (J. Phys. Chem. Ref. Data 8, 307, 1979), both as carried by xraylib 4.0.0 (RadRate,
// FluorYield). kRates below lists ω_K and the fractions KL3, KL2, KM3+KM2 of all K radiative transitions.
var anodes = []Anode{
	kAnode("Cr", 24, 5.989017, 5.4148045, 5.4055384, 5.946823, kRates{0.2885, 0.58703, 0.29898, 0.07577 + 0.03823}),
	kAnode("Fe", 26, 7.110747, 6.4040062, 6.3910264, 7.058175, kRates{0.3546, 0.58357, 0.29799, 0.07856 + 0.03988}),
	kAnode("Co", 27, 7.708776, 6.930378, 6.915538, 7.649445, kRates{0.3880, 0.58292, 0.29807, 0.07887 + 0.04014}),
	kAnode("Cu", 29, 8.980476, 8.0478227, 8.0278416, 8.905413, kRates{0.4538, 0.58283, 0.29913, 0.07816 + 0.03989}),
	kAnode("Mo", 42, 20.000351, 17.479372, 17.37429, 19.60834, kRates{0.7672, 0.54964, 0.28821, 0.09316 + 0.04774}),
	kAnode("Ag", 47, 25.51559, 22.162917, 21.99030, 24.94242, kRates{0.8313, 0.54111, 0.28650, 0.09729 + 0.04997}),
	withLines(kAnode("W", 74, 69.5085, 59.318847, 57.98177, 67.2450, kRates{0.9538, 0.50243, 0.28917, 0.10808 + 0.05588}),
		wLLines()...),
}

// kRates are an element's K fluorescence yield and the radiative fractions of Kα1 (KL3), Kα2 (KL2) and
// Kβ1,3 (KM3 + KM2).
type kRates struct{ omega, ka1, ka2, kb13 float64 }

// kAnode builds an anode with Kα1, Kα2 and Kβ1 lines.
func kAnode(sym string, z int, kEdge, ka1, ka2, kb1 float64, r kRates) Anode {
	return Anode{Symbol: sym, Z: z, KEdgeKeV: kEdge, Lines: []Line{
		{Name: "Kα1", IUPAC: "KL3", EnergyKeV: ka1, EdgeKeV: kEdge, Shell: "K", PerVacancy: r.omega * r.ka1, Relative: 1},
		{Name: "Kα2", IUPAC: "KL2", EnergyKeV: ka2, EdgeKeV: kEdge, Shell: "K", PerVacancy: r.omega * r.ka2, Relative: r.ka2 / r.ka1},
		{Name: "Kβ1", IUPAC: "KM3", EnergyKeV: kb1, EdgeKeV: kEdge, Shell: "K", PerVacancy: r.omega * r.kb13, Relative: r.kb13 / r.ka1},
	}}
}

// wLLines are tungsten's strong L lines, the only ones a tube below 69.5 kV excites.
// Lα1 and Lβ1 energies and the L3 edge: NIST SRD 128. Lα2, Lβ2 energies and the L2 edge: xraylib 4.0.0
// (LineEnergy, EdgeEnergy). Fluorescence yields ω_L3 = 0.255, ω_L2 = 0.27 (Krause 1979) and radiative
// fractions L3M5 0.72219, L3M4 0.081869, L3N5 0.12811, L2M4 0.81446 (Scofield 1974), both via xraylib.
// Coster–Kronig transfer from L2 to L3 is left out, so L3 lines are slightly underestimated.
func wLLines() []Line {
	const wL3, wL2, l3Edge, l2Edge = 0.255, 0.27, 10.2001, 11.544
	ls := []Line{
		{Name: "Lα1", IUPAC: "L3M5", EnergyKeV: 8.398242, EdgeKeV: l3Edge, Shell: "L3", PerVacancy: wL3 * 0.72219},
		{Name: "Lα2", IUPAC: "L3M4", EnergyKeV: 8.3352, EdgeKeV: l3Edge, Shell: "L3", PerVacancy: wL3 * 0.081869},
		{Name: "Lβ1", IUPAC: "L2M4", EnergyKeV: 9.672575, EdgeKeV: l2Edge, Shell: "L2", PerVacancy: wL2 * 0.81446},
		{Name: "Lβ2", IUPAC: "L3N5", EnergyKeV: 9.9614, EdgeKeV: l3Edge, Shell: "L3", PerVacancy: wL3 * 0.12811},
	}
	strongest := ls[0].PerVacancy * float64(ls[0].ShellElectrons())
	for i := range ls {
		ls[i].Relative = ls[i].PerVacancy * float64(ls[i].ShellElectrons()) / strongest
	}
	return ls
}

func withLines(a Anode, extra ...Line) Anode {
	a.Lines = append(a.Lines, extra...)
	return a
}

// LookupAnode finds an anode by element symbol, case-insensitive, ignoring surrounding spaces.
func LookupAnode(symbol string) (Anode, error) {
	for _, a := range anodes {
		if strings.EqualFold(a.Symbol, strings.TrimSpace(symbol)) {
			return a, nil
		}
	}
	return Anode{}, fmt.Errorf("anode %q: unknown; have %s", symbol, strings.Join(AnodeSymbols(), ", "))
}

// AnodeSymbols lists the known anodes by atomic number.
func AnodeSymbols() []string {
	out := make([]string, len(anodes))
	for i, a := range anodes {
		out[i] = a.Symbol
	}
	return out
}

// Line returns the named line of the anode.
func (a Anode) Line(name string) (Line, bool) {
	for _, l := range a.Lines {
		if l.Name == name {
			return l, true
		}
	}
	return Line{}, false
}

// LinesByEnergy returns the anode's lines sorted by increasing energy.
func (a Anode) LinesByEnergy() []Line {
	out := append([]Line(nil), a.Lines...)
	sort.Slice(out, func(i, j int) bool { return out[i].EnergyKeV < out[j].EnergyKeV })
	return out
}

// ExcitedLines returns the lines a tube at kV excites: those whose edge lies below eU.
func (a Anode) ExcitedLines(kV float64) []Line {
	var out []Line
	for _, l := range a.Lines {
		if kV > l.EdgeKeV {
			out = append(out, l)
		}
	}
	return out
}
