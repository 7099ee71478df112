package analysis

import (
	"math/rand/v2"
	"testing"

	"goniod/xray"
)

func TestExplore(t *testing.T) {
	sy := cuOnLiF(18, 52, 0.01)
	s := sy.scan(t, rand.New(rand.NewPCG(1, 2)))
	res, _ := FindPeaks(s, PeakOptions{})
	cu, _ := xray.LookupAnode("Cu")
	ls, err := IdentifyLines(s, res, cu, refLiF200, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range ls.Matches {
		t.Logf("%s c=%.5f±%.5f exp %.5f res %.5f dbl %v chi %.2f", m.Label(), m.Peak.Centre.Value, m.Peak.Centre.Err, m.ExpectedDeg, m.ResidualDeg, m.Doublet, m.Peak.ReducedChi2)
	}
	t.Log(ls.Notes, len(ls.Unmatched))
	lat, err := FitLattice(ReflectionsOf(ls), 0)
	t.Logf("%+v %v rel %.2e", lat.D, err, lat.D.Value/refLiF200-1)
	lat, err = FitLattice(ReflectionsOf(ls), 0.1)
	t.Logf("%+v %v rel %.2e", lat.D, err, lat.D.Value/refLiF200-1)
}

func TestExploreLimit(t *testing.T) {
	var ls []Limit
	for _, kv := range []float64{12, 15, 18, 21, 24, 27, 30} {
		l0 := refHC / kv
		th0 := braggDeg(kv, refLiF200, 1)
		sy := continuum{kv: kv, d: refLiF200, scale: 300, bg: 1}
		s := sy.scan(t, th0-1.5, th0*1.3, 0.02, rand.New(rand.NewPCG(uint64(kv), 2)))
		l, err := DuaneHunt(s, refLiF200, kv)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("kv %v λ %.5f±%.5f truth %.5f rel %.2e chi %.2f", kv, l.Wavelength.Value, l.Wavelength.Err, l0, l.Wavelength.Value/l0-1, l.ReducedChi2)
		ls = append(ls, l)
	}
	h, err := PlanckFromLimits(ls)
	t.Logf("%+v %v rel %.3e", h, err, h.H.Value/6.62607015e-34-1)
}
