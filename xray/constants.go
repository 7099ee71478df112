package xray

// CODATA 2018 exact values (SI redefinition of 2019).
const (
	// PlanckJs is Planck's constant h in J·s.
	PlanckJs = 6.62607015e-34
	// ElementaryChargeC is e in C.
	ElementaryChargeC = 1.602176634e-19
	// SpeedOfLightMs is c in m/s.
	SpeedOfLightMs = 299792458.0
	// HCkeVnm is h·c in keV·nm, derived from the three above.
	HCkeVnm = PlanckJs * SpeedOfLightMs / ElementaryChargeC * 1e9 / 1e3
)
