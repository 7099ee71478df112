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
	// Relative intensity within the element's line family (strongest = 1).
	Relative float64
}

// WavelengthNM is the line's wavelength.
func (l Line) WavelengthNM() float64 { return WavelengthOfEnergyNM(l.EnergyKeV) }

// Anode is an X-ray tube target element.
type Anode struct {
	Symbol string
	Z      int
	// K-shell ionisation energy (K absorption edge), keV.
	KEdgeKeV float64
	Lines    []Line
}

// Energies: NIST SRD 128, X-ray Transition Energies (Deslattes et al., Rev. Mod. Phys. 75, 35, 2003),
// direct experimental values; Cr–Cu Kβ1 are KM2/KM3 blends there.
// Relative intensities: Scofield radiative rates as tabulated by Krause et al. (ORNL-5399, 1978), carried by
// xraylib: Cu Kα2/Kα1 = 0.513, Kβ1,3/Kα = 0.134; Mo Kα2/Kα1 = 0.524, Kβ1,3/Kα = 0.168. For the other K-line
// anodes the Cu (Z <= 29) or Mo (Z >= 42) ratios are used (from memory: the ratios change slowly with Z).
// W L lines: Lα1 (L3M5) and Lβ1 (L2M4) from NIST SRD 128 with the L3 edge 10.2001 keV; their relative
// intensities (Lβ1/Lα1 ≈ 0.5) are from memory.
var anodes = []Anode{
	kAnode("Cr", 24, 5.989017, 5.4148045, 5.4055384, 5.946823, 0.513, 0.134),
	kAnode("Fe", 26, 7.110747, 6.4040062, 6.3910264, 7.058175, 0.513, 0.134),
	kAnode("Co", 27, 7.708776, 6.930378, 6.915538, 7.649445, 0.513, 0.134),
	kAnode("Cu", 29, 8.980476, 8.0478227, 8.0278416, 8.905413, 0.513, 0.134),
	kAnode("Mo", 42, 20.000351, 17.479372, 17.37429, 19.60834, 0.524, 0.168),
	kAnode("Ag", 47, 25.51559, 22.162917, 21.99030, 24.94242, 0.524, 0.168),
	withLines(kAnode("W", 74, 69.5085, 59.318847, 57.98177, 67.2450, 0.524, 0.168),
		Line{Name: "Lα1", IUPAC: "L3M5", EnergyKeV: 8.398242, EdgeKeV: 10.2001, Relative: 1},
		Line{Name: "Lβ1", IUPAC: "L2M4", EnergyKeV: 9.672575, EdgeKeV: 11.5440, Relative: 0.5},
	),
}

// kAnode builds an anode with Kα1, Kα2 and Kβ1 lines. a2 is Kα2/Kα1; b is Kβ/(Kα1+Kα2).
func kAnode(sym string, z int, kEdge, ka1, ka2, kb1, a2, b float64) Anode {
	return Anode{Symbol: sym, Z: z, KEdgeKeV: kEdge, Lines: []Line{
		{Name: "Kα1", IUPAC: "KL3", EnergyKeV: ka1, EdgeKeV: kEdge, Relative: 1},
		{Name: "Kα2", IUPAC: "KL2", EnergyKeV: ka2, EdgeKeV: kEdge, Relative: a2},
		{Name: "Kβ1", IUPAC: "KM3", EnergyKeV: kb1, EdgeKeV: kEdge, Relative: b * (1 + a2)},
	}}
}

func withLines(a Anode, extra ...Line) Anode {
	a.Lines = append(a.Lines, extra...)
	return a
}

// LookupAnode finds an anode by element symbol, case-insensitive.
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
