// Dispersion along paths of straight segments through labelled points,
// with branches optionally followed by eigenvector overlap and, when asked,
// the share of each site in each branch.

package physics

import (
	"context"
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/materials-lab/modegrid/physics/lattice"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// Path sampling defaults and bounds.
const (
	DefaultPathPoints = 201    // samples when neither a count nor a spacing is given
	MaxPathSamples    = 200000 // engine bound on the samples of one path
)

// PathCorner is one corner of a path: explicit coordinates (HasQ) or a
// built-in label of the lattice type (StandardPoints; "Γ" and "Gamma" are
// accepted for "G"). BreakBefore starts a new, disconnected piece here.
type PathCorner struct {
	Label       string
	Q           [3]float64 // fractional reciprocal coordinates, when HasQ
	HasQ        bool
	BreakBefore bool
}

// PathOptions controls the sampling of a path.
type PathOptions struct {
	// Points is the total number of samples, corners included, shared among
	// the segments by length; 0 means DefaultPathPoints.
	Points int
	// SpacingInvA, when > 0, replaces Points: every segment gets the
	// fewest equal steps no longer than this (Å⁻¹, 2π included).
	SpacingInvA float64
	// FollowModes orders the frequencies of each sample by branch,
	// following eigenvector overlap from the previous sample, instead of
	// ascending.
	FollowModes bool
	// SiteWeights fills PathSample.SiteWeight.
	SiteWeights bool
}

// PathSample is one sample along the path.
type PathSample struct {
	DistanceInvA float64    // cumulative distance along the path, Å⁻¹ (2π included; breaks add nothing)
	Q            [3]float64 // fractional reciprocal coordinates
	Label        string     // the corner's label at corners, else ""
	FreqTHz      []float64  // ascending, or by branch when modes are followed
	// SiteWeight, with PathOptions.SiteWeights, is the share of site s in
	// branch b at SiteWeight[b*Sites()+s], in the order of FreqTHz:
	// Σ_axes |e_s,axis|² of the normalised eigenvector of D(q), in [0, 1]
	// and summing to 1 over the sites (see siteShares for degenerate modes).
	SiteWeight []float64
	// GammaDir, at a sample on Γ of a model with a long-range term, is the
	// direction from which the path reaches or leaves it, as a fractional
	// reciprocal vector (the segment's Δq, largest |component| 1): the
	// non-analytic limit taken there. A corner on Γ between two segments of
	// different directions is sampled twice, at one distance, once with
	// each (LO–TO splitting on both sides). Zero elsewhere.
	GammaDir [3]float64
}

// lookupLabel resolves a built-in label.
func (m *Model) lookupLabel(label string) ([3]float64, bool) {
	switch strings.ToUpper(label) {
	case "Γ", "GAMMA", "G":
		label = "G"
	}
	q, ok := m.standard[label]
	return q, ok
}

// cartQ converts fractional q to Cartesian Å⁻¹.
func (m *Model) cartQ(q [3]float64) [3]float64 {
	var c [3]float64
	for k := 0; k < m.dim; k++ {
		for a := 0; a < 3; a++ {
			c[a] += q[k] * m.recip[k][a]
		}
	}
	return c
}

// Dispersion samples the frequencies along the path through corners.
// Samples include every corner; consecutive corners are joined by straight
// segments unless the later one has BreakBefore. Invalid input returns a
// *ValidationError with fields "path[i].label", "path[i].q.q1" (finite,
// within ±MaxQ), "points", "spacing_inv_a". The work runs on all cores and
// stops when ctx is done.
//
// Validation comes in three rounds, each reported whole before the next is
// tried: the corners and options one by one, then the segments they form,
// then the number of samples those segments would take.
func (m *Model) Dispersion(ctx context.Context, corners []PathCorner, opt PathOptions) ([]PathSample, error) {
	var vs Violations
	qs := m.resolveCorners(corners, opt, &vs)
	if len(vs.list) > 0 {
		return nil, vs.Err()
	}
	seglen, total := m.segmentLengths(corners, qs, &vs)
	if len(vs.list) > 0 {
		return nil, vs.Err()
	}
	steps, nsamples := planSteps(len(corners), seglen, total, opt, &vs)
	if len(vs.list) > 0 {
		return nil, vs.Err()
	}
	samples, pieceStart := pathSamples(corners, qs, seglen, steps, nsamples)
	samples, pieceStart = m.splitGamma(samples, pieceStart)
	if err := m.fillPathModes(ctx, samples, pieceStart, opt); err != nil {
		return nil, err
	}
	return samples, nil
}

// resolveCorners returns the fractional q of every corner, from its
// coordinates or its built-in label, and checks the sampling options.
func (m *Model) resolveCorners(corners []PathCorner, opt PathOptions, vs *Violations) [][3]float64 {
	qs := make([][3]float64, len(corners))
	if len(corners) < 2 {
		vs.Add("path", "must have at least 2 points, got %d", len(corners))
	}
	for i, c := range corners {
		f := fmt.Sprintf("path[%d]", i)
		if c.HasQ {
			m.checkCornerQ(f, c.Q, vs)
			qs[i] = c.Q
			continue
		}
		if c.Label == "" {
			vs.Add(f, "needs coordinates or a built-in label")
			continue
		}
		q, ok := m.lookupLabel(c.Label)
		if !ok {
			vs.Add(f+".label", "unknown label %q for this %s lattice (built in: %s); give its coordinates", c.Label, m.latticeTypeName(), strings.Join(m.knownLabels(), ", "))
			continue
		}
		qs[i] = q
	}
	switch {
	case opt.Points < 0:
		vs.Add("points", "must be ≥ 0, got %d", opt.Points)
	case !finite(opt.SpacingInvA) || opt.SpacingInvA < 0:
		vs.Add("spacing_inv_a", "must be a finite number ≥ 0, got %v", opt.SpacingInvA)
	}
	return qs
}

// checkCornerQ checks the given coordinates q of the corner at field f:
// finite, within ±MaxQ, and 0 beyond the crystal's dimension.
func (m *Model) checkCornerQ(f string, q [3]float64, vs *Violations) {
	for k, x := range q {
		switch {
		case !(math.Abs(x) <= MaxQ):
			vs.Add(fmt.Sprintf("%s.q.q%d", f, k+1), qRangeMsg, x)
		case k >= m.dim && x != 0:
			vs.Add(fmt.Sprintf("%s.q.q%d", f, k+1), "must be 0 for a %d-dimensional crystal, got %v", m.dim, x)
		}
	}
}

// knownLabels lists the built-in labels of the model's lattice, sorted.
func (m *Model) knownLabels() []string {
	known := make([]string, 0, len(m.standard))
	for k := range m.standard {
		known = append(known, k)
	}
	sort.Strings(known)
	return known
}

// latticeTypeName names the lattice type for messages.
func (m *Model) latticeTypeName() string {
	if m.latticeType == "" {
		return "unrecognised"
	}
	return m.latticeType
}

// segmentLengths returns the Cartesian length (Å⁻¹) of the segment ending
// at each corner (0 at the start of a piece) and their sum, and reports a
// zero-length segment and a piece of one point.
func (m *Model) segmentLengths(corners []PathCorner, qs [][3]float64, vs *Violations) (seglen []float64, total float64) {
	seglen = make([]float64, len(corners))
	for i := 1; i < len(corners); i++ {
		if corners[i].BreakBefore {
			continue
		}
		l := lattice.Norm(lattice.Sub(m.cartQ(qs[i]), m.cartQ(qs[i-1])))
		if l < 1e-12 {
			vs.Add(fmt.Sprintf("path[%d]", i), "is the same point as path[%d]: a segment needs two distinct points (use break_before to jump)", i-1)
		}
		seglen[i] = l
		total += l
	}
	for i := range corners {
		start := i == 0 || corners[i].BreakBefore
		end := i == len(corners)-1 || corners[i+1].BreakBefore
		if start && end {
			vs.Add(fmt.Sprintf("path[%d]", i), "is alone in its piece of path: a piece needs at least two points")
		}
	}
	return seglen, total
}

// planSteps returns, for each segment, the number of steps from its first
// corner to its last (0 at a piece start), and the total number of
// samples: from the spacing if one is given, else by sharing opt.Points
// (or the default) among segments by length.
func planSteps(ncorners int, seglen []float64, total float64, opt PathOptions, vs *Violations) (steps []int, nsamples int) {
	steps = make([]int, ncorners)
	nsamples = ncorners
	if opt.SpacingInvA > 0 {
		for i, l := range seglen {
			if l > 0 {
				s := math.Ceil(l/opt.SpacingInvA - 1e-9)
				if s > MaxPathSamples {
					s = MaxPathSamples + 1
				}
				steps[i] = max(1, int(s))
				nsamples += steps[i] - 1
			}
		}
		if nsamples > MaxPathSamples {
			vs.Add("spacing_inv_a", "%v Å⁻¹ gives more than %d samples over a path of %.4g Å⁻¹", opt.SpacingInvA, MaxPathSamples, total)
		}
		return steps, nsamples
	}
	n := opt.Points
	if n == 0 {
		n = DefaultPathPoints
	}
	switch {
	case n > MaxPathSamples:
		vs.Add("points", "must be ≤ %d, got %d", MaxPathSamples, n)
	case n < ncorners:
		vs.Add("points", "must be at least the number of path points (%d), got %d", ncorners, n)
	default:
		distributeSteps(seglen, total, n-ncorners, steps)
		nsamples = n
	}
	return steps, nsamples
}

// pathSamples lays the samples along the segments (frequencies not yet
// filled in) and marks those that start a piece of path.
func pathSamples(corners []PathCorner, qs [][3]float64, seglen []float64, steps []int, nsamples int) (samples []PathSample, pieceStart []bool) {
	samples = make([]PathSample, 0, nsamples)
	pieceStart = make([]bool, 0, nsamples)
	var dist float64
	for i := range corners {
		if i == 0 || corners[i].BreakBefore {
			samples = append(samples, PathSample{DistanceInvA: dist, Q: qs[i], Label: corners[i].Label})
			pieceStart = append(pieceStart, true)
			continue
		}
		a, b := qs[i-1], qs[i]
		for j := 1; j <= steps[i]; j++ {
			t := float64(j) / float64(steps[i])
			var q [3]float64
			for k := range q {
				q[k] = a[k] + t*(b[k]-a[k])
			}
			s := PathSample{DistanceInvA: dist + t*seglen[i], Q: q}
			if j == steps[i] {
				s.Q, s.Label = b, corners[i].Label
			}
			samples = append(samples, s)
			pieceStart = append(pieceStart, false)
		}
		dist += seglen[i]
	}
	return samples, pieceStart
}

// fillPathModes computes the frequencies (and site weights, if asked) of
// every sample, following the branches through each piece if asked.
func (m *Model) fillPathModes(ctx context.Context, samples []PathSample, pieceStart []bool, opt PathOptions) error {
	pts := make([]mesh.QPoint, len(samples))
	for i, s := range samples {
		pts[i] = mesh.QPoint{Q: s.Q, Weight: 1}
	}
	n := m.ModeCount()
	var conn *connector
	mopt := ModeOptions{Eigenvectors: opt.FollowModes || opt.SiteWeights, GammaDirs: m.gammaDirsOf(samples)}
	if opt.FollowModes {
		conn = newConnector(n)
	}
	if mopt.Eigenvectors {
		mopt.ChunkSize = max(1, min(64, DefaultChunkBytes/(16*n*n+1)))
	}
	return m.StreamModes(ctx, pts, mopt, func(c ModeChunk) error {
		for k, pm := range c.Points {
			i := c.Offset + k
			if conn == nil {
				samples[i].FreqTHz = pm.FreqTHz
				if opt.SiteWeights {
					samples[i].SiteWeight = m.siteShares(pm.Eigvecs, pm.FreqTHz)
				}
				continue
			}
			samples[i].FreqTHz = conn.next(pm.FreqTHz, pm.Eigvecs, pieceStart[i])
			if opt.SiteWeights {
				// The followed vectors, in branch order; inside a piece a
				// degenerate group is already aligned to the branches
				// coming in, so only a piece's first sample needs the mean.
				var groups []float64
				if pieceStart[i] {
					groups = pm.FreqTHz
				}
				samples[i].SiteWeight = m.siteShares(conn.prev, groups)
			}
		}
		return nil
	})
}

// distributeSteps shares extra interior samples among segments in
// proportion to their lengths (largest remainders first) and sets steps[i]
// = interior_i + 1 for every segment.
func distributeSteps(seglen []float64, total float64, extra int, steps []int) {
	type rem struct {
		i int
		r float64
	}
	var rems []rem
	used := 0
	for i, l := range seglen {
		if l == 0 {
			continue
		}
		ideal := float64(extra) * l / total
		k := int(math.Floor(ideal))
		steps[i] = k + 1
		used += k
		rems = append(rems, rem{i, ideal - float64(k)})
	}
	sort.SliceStable(rems, func(a, b int) bool { return rems[a].r > rems[b].r })
	for k := 0; k < extra-used && k < len(rems); k++ {
		steps[rems[k].i]++
	}
}

// connector follows branches from sample to sample by eigenvector overlap.
type connector struct {
	n       int
	prev    []complex128 // previous sample's vectors in branch order (mode-major)
	cur     []complex128
	ov      []float64 // |⟨prev_b | cur_l⟩|²
	taken   []bool
	assign  []int // branch b ← mode assign[b]
	started bool
}

func newConnector(n int) *connector {
	return &connector{n: n, prev: make([]complex128, n*n), cur: make([]complex128, n*n),
		ov: make([]float64, n*n), taken: make([]bool, n), assign: make([]int, n)}
}

// degenerateTHz groups modes of one sample for the overlap step: inside a
// group the solver's vectors are arbitrary.
const degenerateTHz = 1e-6

// next returns the frequencies of a sample in branch order, and leaves the
// sample's vectors in branch order in c.prev. At the start of a piece the
// order is ascending.
func (c *connector) next(freq []float64, vecs []complex128, start bool) []float64 {
	n := c.n
	copy(c.cur, vecs)
	out := make([]float64, n)
	if start || !c.started {
		c.started = true
		copy(out, freq)
		copy(c.prev, c.cur)
		return out
	}
	// Inside each degenerate group, replace the arbitrary vectors by the
	// projections of the incoming branches with the largest weight in the
	// group (orthonormalised), so identities survive a crossing at a
	// sample; then overlaps decide.
	for lo := 0; lo < n; {
		hi := lo + 1
		for hi < n && freq[hi]-freq[hi-1] <= degenerateTHz {
			hi++
		}
		if hi-lo > 1 {
			c.align(lo, hi)
		}
		lo = hi
	}
	for b := 0; b < n; b++ {
		pb := c.prev[b*n : (b+1)*n]
		for l := 0; l < n; l++ {
			z := dotc(pb, c.cur[l*n:(l+1)*n])
			c.ov[b*n+l] = real(z)*real(z) + imag(z)*imag(z)
		}
	}
	// Greedy matching: branches in order of their best overlap take their
	// best free mode (O(n²), enough when overlaps are near 0 or 1).
	order := make([]int, n)
	best := make([]float64, n)
	for b := 0; b < n; b++ {
		order[b] = b
		for l := 0; l < n; l++ {
			best[b] = math.Max(best[b], c.ov[b*n+l])
		}
	}
	sort.SliceStable(order, func(x, y int) bool { return best[order[x]] > best[order[y]] })
	clear(c.taken)
	for _, b := range order {
		bl, bv := -1, -1.0
		for l := 0; l < n; l++ {
			if !c.taken[l] && c.ov[b*n+l] > bv {
				bl, bv = l, c.ov[b*n+l]
			}
		}
		c.taken[bl] = true
		c.assign[b] = bl
	}
	for b, l := range c.assign {
		out[b] = freq[l]
		copy(c.prev[b*n:(b+1)*n], c.cur[l*n:(l+1)*n])
	}
	return out
}

// siteShares returns the share of each site in each mode of vecs
// (mode-major, normalised), mode-major: Σ_axes |e_s,axis|², the site's
// share of the mode's kinetic energy. When groups (the modes' ascending
// frequencies) is given, each group of degenerate modes (within
// degenerateTHz) gets the group mean: there the solver's vectors are an
// arbitrary basis of the group's subspace, and the mean (the site's part of
// the trace of the projector on the subspace, over the group size) does not
// depend on that basis.
func (m *Model) siteShares(vecs []complex128, groups []float64) []float64 {
	n, ns, p := m.ModeCount(), m.nsites, m.p
	out := make([]float64, n*ns)
	for k := 0; k < n; k++ {
		for s := 0; s < ns; s++ {
			var w float64
			for a := 0; a < p; a++ {
				z := vecs[k*n+s*p+a]
				w += real(z)*real(z) + imag(z)*imag(z)
			}
			out[k*ns+s] = w
		}
	}
	for lo := 0; lo < len(groups); {
		hi := lo + 1
		for hi < n && groups[hi]-groups[hi-1] <= degenerateTHz {
			hi++
		}
		for s := 0; s < ns && hi-lo > 1; s++ {
			var mean float64
			for k := lo; k < hi; k++ {
				mean += out[k*ns+s]
			}
			mean /= float64(hi - lo)
			for k := lo; k < hi; k++ {
				out[k*ns+s] = mean
			}
		}
		lo = hi
	}
	return out
}

// align rotates the degenerate group [lo, hi) of c.cur onto the
// projections of the previous branches that overlap it most.
func (c *connector) align(lo, hi int) {
	n, size := c.n, hi-lo
	type wb struct {
		b int
		w float64
	}
	ws := make([]wb, n)
	for b := 0; b < n; b++ {
		pb := c.prev[b*n : (b+1)*n]
		var w float64
		for l := lo; l < hi; l++ {
			z := dotc(c.cur[l*n:(l+1)*n], pb)
			w += real(z)*real(z) + imag(z)*imag(z)
		}
		ws[b] = wb{b, w}
	}
	sort.SliceStable(ws, func(x, y int) bool { return ws[x].w > ws[y].w })
	basis := make([]complex128, size*n)
	got := 0
	for _, x := range ws {
		if got == size {
			break
		}
		// Projection of prev_b onto the group subspace.
		v := basis[got*n : (got+1)*n]
		clear(v)
		pb := c.prev[x.b*n : (x.b+1)*n]
		for l := lo; l < hi; l++ {
			cl := c.cur[l*n : (l+1)*n]
			z := dotc(cl, pb)
			for i := range v {
				v[i] += z * cl[i]
			}
		}
		for k := 0; k < got; k++ {
			u := basis[k*n : (k+1)*n]
			z := dotc(u, v)
			for i := range v {
				v[i] -= z * u[i]
			}
		}
		var nrm float64
		for _, z := range v {
			nrm += real(z)*real(z) + imag(z)*imag(z)
		}
		if nrm < 1e-6 {
			continue
		}
		inv := complex(1/math.Sqrt(nrm), 0)
		for i := range v {
			v[i] *= inv
		}
		got++
	}
	if got < size {
		return // the group is not fed by the previous branches: keep it
	}
	copy(c.cur[lo*n:hi*n], basis)
}

// DefaultPath returns the default path of the model's lattice through its
// built-in points (labels only; Dispersion resolves them), or nil when the
// lattice type has none (an unrecognised 3D lattice: give coordinates).
func (m *Model) DefaultPath() []PathCorner {
	spec := lattice.DefaultPath(m.dim, m.latticeType)
	if spec == "" {
		return nil
	}
	var out []PathCorner
	for pi, piece := range strings.Split(spec, "|") {
		for li, label := range strings.Split(piece, "-") {
			out = append(out, PathCorner{Label: label, BreakBefore: pi > 0 && li == 0})
		}
	}
	return out
}
