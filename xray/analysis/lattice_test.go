package analysis

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"goniod/xray"
)

// TestFitLatticeExactReflections: reflections computed with nλ = 2d sin θ from NIST SRD 128 Cu lines and the
// handbook LiF(200) spacing (Wyckoff via xraylib) give back that spacing.
func TestFitLatticeExactReflections(t *testing.T) {
	var refl []Reflection
	for n := 1; n <= 2; n++ {
		for _, keV := range []float64{refCuKa1, refCuKa2, refCuKb1} {
			refl = append(refl, Reflection{ThetaDeg: braggDeg(keV, refLiF200, n), Order: n, WavelengthNM: refHC / keV})
		}
	}
	lat, err := FitLattice(refl, DefaultAngleErrDeg)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(lat.D.Value-refLiF200) > 1e-12 || lat.ReducedChi2 > 1e-12 || lat.DoF != len(refl)-1 {
		t.Errorf("d = %.12f nm, χ²ν = %g, DoF %d; want %.12f, 0, %d", lat.D.Value, lat.ReducedChi2, lat.DoF, refLiF200, len(refl)-1)
	}
}

// TestFitLatticeSingleReflectionError: with one reflection d = nλ/(2 sin θ) and the effective-variance error
// reduces to the propagated σ_d = d·cot θ·σ_θ (σ_θ in radians).
func TestFitLatticeSingleReflectionError(t *testing.T) {
	th := braggDeg(refCuKa1, refLiF200, 1)
	lat, err := FitLattice([]Reflection{{ThetaDeg: th, ThetaErrDeg: 0.05, Order: 1, WavelengthNM: refHC / refCuKa1}}, 0.1)
	if err != nil {
		t.Fatal(err)
	}
	want := refLiF200 / math.Tan(th*math.Pi/180) * math.Hypot(0.05, 0.1) * math.Pi / 180
	if math.Abs(lat.D.Err-want) > 1e-12*want || math.Abs(lat.D.Value-refLiF200) > 1e-12 {
		t.Errorf("d = %.10f ± %.4g, want %.10f ± %.4g", lat.D.Value, lat.D.Err, refLiF200, want)
	}
}

// TestFitLatticeScalesInconsistentErrors: reflections that scatter more than their errors allow give χ²ν > 1,
// and σ_d grows by √χ²ν.
func TestFitLatticeScalesInconsistentErrors(t *testing.T) {
	var refl []Reflection
	for k, keV := range []float64{refCuKa1, refCuKb1, refCuKa2} {
		refl = append(refl, Reflection{ThetaDeg: braggDeg(keV, refLiF200, 1) + 0.05*float64(k-1), Order: 1, WavelengthNM: refHC / keV})
	}
	lat, err := FitLattice(refl, 0.001)
	if err != nil {
		t.Fatal(err)
	}
	raw := 0.0
	for _, r := range refl {
		se := lat.D.Value * math.Cos(r.ThetaDeg*math.Pi/180) * 0.001 * math.Pi / 180
		x := math.Sin(r.ThetaDeg * math.Pi / 180)
		raw += x * x / (se * se)
	}
	if !(lat.ReducedChi2 > 1) || math.Abs(lat.D.Err-math.Sqrt(lat.ReducedChi2/raw)) > 1e-9*lat.D.Err {
		t.Errorf("χ²ν = %g, σ_d = %g; want χ²ν > 1 and σ_d = %g", lat.ReducedChi2, lat.D.Err, math.Sqrt(lat.ReducedChi2/raw))
	}
}

func TestFitLatticeRefusesBadInput(t *testing.T) {
	good := Reflection{ThetaDeg: 22.5, Order: 1, WavelengthNM: 0.154}
	for name, c := range map[string]struct {
		r   []Reflection
		err float64
	}{
		"none":          {nil, 0.1},
		"θ = 90":        {[]Reflection{{ThetaDeg: 90, Order: 1, WavelengthNM: 0.1}}, 0.1},
		"order 0":       {[]Reflection{{ThetaDeg: 20, Order: 0, WavelengthNM: 0.1}}, 0.1},
		"λ NaN":         {[]Reflection{{ThetaDeg: 20, Order: 1, WavelengthNM: math.NaN()}}, 0.1},
		"angle err < 0": {[]Reflection{good}, -0.1},
		"θ err NaN":     {[]Reflection{{ThetaDeg: 20, ThetaErrDeg: math.NaN(), Order: 1, WavelengthNM: 0.1}}, 0.1},
	} {
		if _, err := FitLattice(c.r, c.err); !errors.Is(err, ErrData) {
			t.Errorf("%s: err = %v, want ErrData", name, err)
		}
	}
}

// latticeOf runs the whole chain on a scan: peaks, lines, lattice with the fits' own angle errors.
func latticeOf(t testing.TB, s *Scan, angleErr float64) Lattice {
	t.Helper()
	cu, _ := xray.LookupAnode("Cu")
	ps, err := FindPeaks(s, PeakOptions{})
	if err != nil {
		t.Fatal(err)
	}
	ls, err := IdentifyLines(s, ps, cu, refLiF200, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	lat, err := FitLattice(ReflectionsOf(ls), angleErr)
	if err != nil {
		t.Fatal(err)
	}
	return lat
}

// TestLatticeFromScans: from noise-free and noisy synthetic Cu/LiF coupled scans the whole chain returns the
// handbook LiF(200) spacing (Wyckoff via xraylib) within 0.1 %; over 100 noisy scans the scatter of d matches
// the σ_d the fit reports (fit errors only, no assumed angle error).
func TestLatticeFromScans(t *testing.T) {
	sy := cuOnLiF(18, 52, 0.01)
	lat := latticeOf(t, sy.scan(t, nil), DefaultAngleErrDeg)
	if rel := lat.D.Value/refLiF200 - 1; math.Abs(rel) > 1e-5 {
		t.Errorf("noise-free: d = %.7f nm, %.2g from the table", lat.D.Value, rel)
	}
	rng := rand.New(rand.NewPCG(51, 52))
	const runs = 100
	var sum, sum2, sigma float64
	for range runs {
		l := latticeOf(t, sy.scan(t, rng), 0)
		if rel := l.D.Value/refLiF200 - 1; math.Abs(rel) > 1e-3 {
			t.Fatalf("d = %.7f nm is %.2g from the table", l.D.Value, rel)
		}
		sum, sum2, sigma = sum+l.D.Value, sum2+l.D.Value*l.D.Value, sigma+l.D.Err
	}
	mean := sum / runs
	sd, reported := math.Sqrt(sum2/runs-mean*mean), sigma/runs
	if r := sd / reported; r < 0.75 || r > 1.3 {
		t.Errorf("scatter of d %.3g nm vs reported σ %.3g nm (ratio %.2f); want ≈ 1", sd, reported, r)
	}
	if math.Abs(mean-refLiF200) > 4*sd/math.Sqrt(runs) {
		t.Errorf("mean d %.8f nm is biased: table %.8f, standard error of the mean %.2g", mean, refLiF200, sd/math.Sqrt(runs))
	}
	t.Logf("d = %.8f nm (table %.8f), scatter %.3g, reported σ %.3g", mean, refLiF200, sd, reported)
}
