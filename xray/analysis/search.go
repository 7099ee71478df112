package analysis

import (
	"math"
	"sort"
)

// DefaultSignificance is the detection threshold, in standard deviations, when none is given.
const DefaultSignificance = 5

// candidate is a peak found by the search, before fitting.
type candidate struct {
	i      int     // index of the maximum
	z      float64 // significance of the window at i
	bg     float64 // observed background rate at i, cps
	excess float64 // observed rate above background at i, cps
	fwhm   float64 // width estimate, degrees
	run    int     // index of the run of significant points it belongs to
}

// searcher holds the work arrays of one peak search. The significance at point i compares the counts of an
// on-window [i−half, i+half] with a background predicted by a weighted straight-line fit to the unmasked points
// of [i−h, i+h] outside the on-window.
type searcher struct {
	s       *Scan
	half, h int
	mask    []bool
	flat    bool // background by the mean only
	x0      float64
	// Prefix sums over unmasked points (weights t = dwell, X = x − x0): Σt, ΣtX, ΣtX², ΣN, ΣNX, count.
	cT, cTX, cTXX, cN, cNX, cK []float64
	// Prefix sums over all points: ΣN, Σt, ΣtX.
	pN, pT, pTX []float64
	z, bg       []float64
}

func newSearcher(s *Scan) *searcher {
	n := s.Len()
	sr := &searcher{s: s, mask: make([]bool, n), x0: s.X[0], z: make([]float64, n), bg: make([]float64, n)}
	for _, p := range []*[]float64{&sr.cT, &sr.cTX, &sr.cTXX, &sr.cN, &sr.cNX, &sr.cK, &sr.pN, &sr.pT, &sr.pTX} {
		*p = make([]float64, n+1)
	}
	for i := range n {
		t, X, c := s.Dwell[i], s.X[i]-sr.x0, s.Counts[i]
		sr.pN[i+1], sr.pT[i+1], sr.pTX[i+1] = sr.pN[i]+c, sr.pT[i]+t, sr.pTX[i]+t*X
	}
	return sr
}

// sums rebuilds the prefix sums of unmasked points.
func (sr *searcher) sums() {
	s := sr.s
	for i := range s.Len() {
		t, X, c, k := s.Dwell[i], s.X[i]-sr.x0, s.Counts[i], 1.0
		if sr.mask[i] {
			t, c, k = 0, 0, 0
		}
		sr.cT[i+1], sr.cTX[i+1], sr.cTXX[i+1] = sr.cT[i]+t, sr.cTX[i]+t*X, sr.cTXX[i]+t*X*X
		sr.cN[i+1], sr.cNX[i+1], sr.cK[i+1] = sr.cN[i]+c, sr.cNX[i]+c*X, sr.cK[i]+k
	}
}

// offSums returns the background sums over unmasked points of [lo, hi) minus the on-window [a, b).
func (sr *searcher) offSums(lo, hi, a, b int) (t, tx, txx, n, nx, k float64) {
	d := func(c []float64) float64 { return c[hi] - c[lo] - (c[b] - c[a]) }
	return d(sr.cT), d(sr.cTX), d(sr.cTXX), d(sr.cN), d(sr.cNX), d(sr.cK)
}

// minOff is the fewest background points a test needs; the background window widens until it has them.
const minOff = 6

// test computes the significance and background rate at point i. It returns false when the point cannot be
// tested (too few background points even with the widest window).
func (sr *searcher) test(i int, screen float64) bool {
	n := sr.s.Len()
	a, b := max(i-sr.half, 0), min(i+sr.half+1, n)
	need := float64(max(minOff, 2*(b-a)))
	var t, tx, txx, cn, cnx, k float64
	var lo, hi int
	for h := sr.h; ; h *= 2 {
		lo, hi = max(i-h, 0), min(i+h+1, n)
		t, tx, txx, cn, cnx, k = sr.offSums(lo, hi, a, b)
		if k >= need {
			break
		}
		if lo == 0 && hi == n {
			sr.z[i], sr.bg[i] = 0, 0
			return false
		}
	}
	// A straight line when background points lie on both sides (interpolation); the mean otherwise, since
	// extrapolating a line fitted to one side runs away on the flank of a peak. The first pass, before any
	// peak is masked, uses the mean everywhere: a line through a peak's flank can dip under the background
	// beside it, while the mean only rises (fewer detections, never spurious ones).
	rate, slope, teff := cn/t, 0.0, t
	if !sr.flat && sr.cK[a]-sr.cK[lo] >= 2 && sr.cK[hi]-sr.cK[b] >= 2 {
		Xi := sr.s.X[i] - sr.x0
		s0, s1, s2 := t, tx-Xi*t, txx-2*Xi*tx+Xi*Xi*t
		sn, snx := cn, cnx-Xi*cn
		if det := s0*s2 - s1*s1; det > 1e-9*s0*s2 {
			if r := (sn*s2 - snx*s1) / det; r >= 0 {
				rate, slope, teff = r, (s0*snx-s1*sn)/det, det/s2
			}
		}
	}
	Xi := sr.s.X[i] - sr.x0
	tOn := sr.pT[b] - sr.pT[a]
	nOn := sr.pN[b] - sr.pN[a]
	bOn := math.Max(rate*tOn+slope*(sr.pTX[b]-sr.pTX[a]-Xi*tOn), 0)
	alpha := tOn / teff
	sr.bg[i] = rate
	if gaussZ(nOn, bOn, alpha) < screen {
		sr.z[i] = 0
		return true
	}
	sr.z[i] = onOffZ(nOn, bOn, alpha)
	return true
}

// window returns the counts and exposure of the points within half of i.
func (sr *searcher) window(i, half int) (counts, exposure float64) {
	a, b := max(i-half, 0), min(i+half+1, sr.s.Len())
	return sr.pN[b] - sr.pN[a], sr.pT[b] - sr.pT[a]
}

// excess is the observed rate above background in a window of half-width half at i.
func (sr *searcher) excess(i, half int) float64 {
	c, t := sr.window(i, half)
	return c/t - sr.bg[i]
}

// run computes the significance of every point with masking passes: points in significant regions (widened
// by the peak width) are left out of the background of later passes.
func (sr *searcher) run(k float64, widthPts int) {
	maskZ := math.Max(3, k)
	screen := 0.8 * k
	tested := make([]bool, sr.s.Len())
	for pass := range 3 {
		sr.flat = pass == 0
		sr.sums()
		for i := range sr.s.Len() {
			tested[i] = sr.test(i, screen)
		}
		if pass == 2 {
			break
		}
		// Points that could not be tested keep their mask.
		grow := sr.half + widthPts
		next := make([]bool, len(sr.mask))
		for i := range next {
			next[i] = sr.mask[i] && !tested[i]
		}
		for i, z := range sr.z {
			if z >= maskZ {
				for j := max(i-grow, 0); j <= min(i+grow, len(sr.mask)-1); j++ {
					next[j] = true
				}
			}
		}
		sr.mask = next
	}
}

// candidates returns the local maxima of the significant runs that stand out from the valley towards any
// higher maximum of the same run by at least k standard deviations.
func (sr *searcher) candidates(k float64) []candidate {
	var out []candidate
	n, run := sr.s.Len(), 0
	for i := 0; i < n; {
		if sr.z[i] < k {
			i++
			continue
		}
		j := i
		for j < n && sr.z[j] >= k {
			j++
		}
		for _, m := range sr.prominent(i, j, k) {
			out = append(out, candidate{i: m, z: sr.z[m], bg: sr.bg[m], excess: sr.excess(m, sr.half/2), run: run})
		}
		run++
		i = j
	}
	return out
}

// prominent picks the maxima of the run [lo, hi). Maxima and valleys are compared over windows half as wide
// as the detection window, so that a doublet a little wider apart than its lines stays two peaks.
func (sr *searcher) prominent(lo, hi int, k float64) []int {
	hm := sr.half / 2
	ex := make([]float64, hi-lo)
	for i := range ex {
		ex[i] = sr.excess(lo+i, hm)
	}
	var keep []int
	for i := range ex {
		if (i > 0 && ex[i-1] > ex[i]) || (i+1 < len(ex) && ex[i+1] >= ex[i]) {
			continue
		}
		col, found := -1, false
		for _, dir := range []int{-1, 1} {
			v := i
			for j := i + dir; j >= 0 && j < len(ex); j += dir {
				if ex[j] > ex[i] {
					found = true
					if col < 0 || ex[v] > ex[col] {
						col = v
					}
					break
				}
				if ex[j] < ex[v] {
					v = j
				}
			}
		}
		if !found {
			keep = append(keep, lo+i)
			continue
		}
		nj, tj := sr.window(lo+i, hm)
		nv, tv := sr.window(lo+col, hm)
		if onOffZ(nj, nv*tj/tv, tj/tv) >= k {
			keep = append(keep, lo+i)
		}
	}
	return keep
}

// halfWidth estimates the FWHM (degrees) of the peak at i from the 3-point-smoothed excess, walking out to
// half the height but not past the neighbouring peaks at index limits lo and hi.
func (sr *searcher) halfWidth(i, lo, hi int) float64 {
	s := sr.s
	ex := func(j int) float64 {
		a, b := max(j-1, 0), min(j+2, s.Len())
		var c, t float64
		for q := a; q < b; q++ {
			c, t = c+s.Counts[q], t+s.Dwell[q]
		}
		return c/t - sr.bg[j]
	}
	top := ex(i)
	if top <= 0 {
		return s.Step()
	}
	cross := func(dir, limit int) float64 {
		prev := top
		for j := i + dir; j != limit; j += dir {
			e := ex(j)
			if e <= top/2 {
				f := (prev - top/2) / (prev - e)
				return math.Abs(s.X[j-dir] + f*(s.X[j]-s.X[j-dir]) - s.X[i])
			}
			prev = e
		}
		return math.Abs(s.X[limit-dir] - s.X[i])
	}
	w := cross(-1, max(lo, 0)-1) + cross(1, min(hi, s.Len()-1)+1)
	return math.Max(w, s.Step())
}

// search finds the candidate peaks of a scan at significance k. fwhm is the expected width in degrees (0:
// estimate it from the most significant feature).
func search(s *Scan, k, fwhm float64) ([]candidate, *searcher, float64) {
	step := s.Step()
	if fwhm <= 0 {
		// First pass with a five-point window to measure the width of the most significant feature.
		sr := newSearcher(s)
		sr.half, sr.h = 2, 25
		sr.run(k, 5)
		fwhm = 5 * step
		if cs := sr.candidates(k); len(cs) > 0 {
			best := cs[0]
			for _, c := range cs {
				if c.z > best.z {
					best = c
				}
			}
			fwhm = sr.halfWidth(best.i, 0, s.Len()-1)
		}
	}
	widthPts := max(1, int(math.Round(fwhm/step)))
	sr := newSearcher(s)
	sr.half = max(0, (widthPts-1)/2)
	sr.h = max(3*(2*sr.half+1), 10)
	sr.run(k, widthPts)
	cs := sr.candidates(k)
	sort.Slice(cs, func(a, b int) bool { return cs[a].i < cs[b].i })
	for n, c := range cs {
		lo, hi := 0, s.Len()-1
		if n > 0 {
			lo = (cs[n-1].i + c.i) / 2
		}
		if n+1 < len(cs) {
			hi = (cs[n+1].i + c.i + 1) / 2
		}
		cs[n].fwhm = sr.halfWidth(c.i, lo, hi)
	}
	return cs, sr, fwhm
}
