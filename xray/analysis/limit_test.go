package analysis

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// TestPlanckFromExactLimits: limits at λmin = hc/(eU) (CODATA 2018) give back h = 6.626 070 15e-34 J s.
func TestPlanckFromExactLimits(t *testing.T) {
	const h = 6.62607015e-34 // CODATA 2018, exact
	for _, kvs := range [][]float64{{15, 25}, {12, 15, 18, 21, 24, 27, 30}} {
		var ls []Limit
		for _, kv := range kvs {
			ls = append(ls, Limit{KV: kv, Wavelength: Value{refHC / kv, 1e-4}})
		}
		p, err := PlanckFromLimits(ls)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(p.H.Value/h-1) > 1e-9 || math.Abs(p.InterceptNM.Value) > 1e-12 || p.InterceptFitted != (len(kvs) > 2) {
			t.Errorf("%v kV: h = %.10g, intercept %g (fitted %v)", kvs, p.H.Value, p.InterceptNM.Value, p.InterceptFitted)
		}
	}
	if _, err := PlanckFromLimits([]Limit{{KV: 20, Wavelength: Value{0.06, 1e-4}}}); !errors.Is(err, ErrData) {
		t.Errorf("one voltage: err = %v, want ErrData", err)
	}
}

// TestDuaneHuntSeries: synthetic voltage series, continuum by Kramers' law in Ebel's form (see continuum), Cu
// anode, LiF(200) first order, 1 s per 0.02° step. Each λmin lies within 0.3 % of hc/(eU) and h from the
// series within 0.5 % of CODATA 2018, with and without the tube voltage to place the fit.
func TestDuaneHuntSeries(t *testing.T) {
	const h = 6.62607015e-34 // CODATA 2018
	rng := rand.New(rand.NewPCG(71, 72))
	for _, knownKV := range []bool{true, false} {
		var ls []Limit
		for _, kv := range []float64{12, 15, 18, 21, 24, 27, 30} {
			th0 := braggDeg(kv, refLiF200, 1)
			s := continuum{kv: kv, d: refLiF200, scale: 300, bg: 1}.scan(t, th0-1.5, th0*1.3, 0.02, rng)
			given := 0.0
			if knownKV {
				given = kv
			}
			l, err := DuaneHunt(s, refLiF200, given)
			if err != nil {
				t.Fatalf("%g kV: %v", kv, err)
			}
			if rel := l.Wavelength.Value/(refHC/kv) - 1; math.Abs(rel) > 3e-3 {
				t.Errorf("%g kV: λmin = %.6f ± %.6f nm, %.2g from hc/eU", kv, l.Wavelength.Value, l.Wavelength.Err, rel)
			}
			l.KV = kv
			ls = append(ls, l)
		}
		p, err := PlanckFromLimits(ls)
		if err != nil {
			t.Fatal(err)
		}
		if rel := p.H.Value/h - 1; math.Abs(rel) > 5e-3 {
			t.Errorf("kV given %v: h = %.5g ± %.2g J s, %.2g from CODATA", knownKV, p.H.Value, p.H.Err, rel)
		}
		t.Logf("kV given %v: h = %.6g ± %.2g J s (%.2g from CODATA), χ²ν %.2f", knownKV, p.H.Value, p.H.Err, p.H.Value/h-1, p.ReducedChi2)
	}
}

func TestDuaneHuntRefusesShortScans(t *testing.T) {
	th0 := braggDeg(20, refLiF200, 1)
	c := continuum{kv: 20, d: refLiF200, scale: 300, bg: 1}
	for name, s := range map[string]*Scan{
		"starts above the limit": c.scan(t, th0+0.2, th0+3, 0.02, nil),
		"ends at the limit":      c.scan(t, th0-2, th0+0.05, 0.02, nil),
	} {
		if _, err := DuaneHunt(s, refLiF200, 20); !errors.Is(err, ErrData) {
			t.Errorf("%s: err = %v, want ErrData", name, err)
		}
	}
}
