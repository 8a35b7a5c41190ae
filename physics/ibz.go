package physics

import (
	"container/list"
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"strings"
	"sync"
)

// IrreducibleGrid is a regular grid reduced by the model's symmetry and
// time reversal: the irreducible points, their integer multiplicities, and
// the table that unfolds them back onto every grid point.
type IrreducibleGrid struct {
	Spec GridSpec
	// Ops are the model's operations that map this grid onto itself (the
	// identity first); OpIndex values refer to this slice.
	Ops []SymOp
	// Irr are the grid indices (grid order) of the irreducible points,
	// ascending; Mult their multiplicities (Σ Mult = number of points).
	Irr  []int
	Mult []int
	// Slot[g] is the position in Irr of the representative of grid point g,
	// and OpIndex[g] the operation taking the representative q to g:
	// k ≥ 0 means q_g ≡ Ops[k]·q, k < 0 means q_g ≡ −Ops[−k−1]·q (time
	// reversal composed with the operation).
	Slot    []int32
	OpIndex []int16
}

// ReduceGrid returns the irreducible points of spec under the model's
// symmetry operations and time reversal. With a cache (nil: none),
// reductions are kept there and shared by every model with the same
// q-space operations, so repeated requests on one lattice and grid reduce
// once. The first call on a model finds its symmetry (Symmetry); that and
// the reduction of a large grid poll ctx, and ctx.Err() is returned when
// ctx ends first (nothing partial is cached).
func (m *Model) ReduceGrid(ctx context.Context, spec GridSpec, cache *ReductionCache) (*IrreducibleGrid, error) {
	spec, err := spec.normalize(m.dim, "mesh")
	if err != nil {
		return nil, err
	}
	ops, err := m.gridOps(ctx, spec)
	if err != nil {
		return nil, err
	}
	key := irrKey(ops, spec)
	if v, ok := cache.get(key); ok {
		// Share the tables; the ops (with this model's site maps) are ours.
		cp := *v.(*IrreducibleGrid)
		cp.Ops = ops
		return &cp, nil
	}
	ir, err := reduce(ctx, ops, spec)
	if err != nil {
		return nil, err
	}
	cache.put(key, ir)
	return ir, nil
}

// gridOps are the model's operations that map the (normalised) grid onto
// itself.
func (m *Model) gridOps(ctx context.Context, spec GridSpec) ([]SymOp, error) {
	sym, err := m.Symmetry(ctx)
	if err != nil {
		return nil, err
	}
	var ops []SymOp
	for _, op := range sym {
		if gridCompatible(op, spec) {
			ops = append(ops, op)
		}
	}
	return ops, nil
}

func irrKey(ops []SymOp, spec GridSpec) string { return "irr:" + reduceKey(ops, spec) }

func reduceKey(ops []SymOp, spec GridSpec) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%v/%v/%v;", spec.Mesh, spec.Shifted, spec.Finite)
	for _, op := range ops {
		fmt.Fprint(&b, op.QRot)
	}
	return b.String()
}

// gridCompatible reports that the operation maps every point of the grid
// onto a point of the grid: by linearity it is enough that the first point
// lands on the grid and each unit step becomes a whole number of steps.
func gridCompatible(op SymOp, spec GridSpec) bool {
	var origin [3]float64
	for k := 0; k < 3; k++ {
		origin[k] = spec.Offset(k) / float64(spec.Mesh[k])
	}
	img := op.applyQ(origin)
	for k := 0; k < 3; k++ {
		if !nearInt(img[k]*float64(spec.Mesh[k]) - spec.Offset(k)) {
			return false
		}
	}
	for l := 0; l < 3; l++ {
		var step [3]float64
		step[l] = 1 / float64(spec.Mesh[l])
		img := op.applyQ(step)
		for k := 0; k < 3; k++ {
			if !nearInt(img[k] * float64(spec.Mesh[k])) {
				return false
			}
		}
	}
	return true
}

func nearInt(x float64) bool { return math.Abs(x-math.Round(x)) < 1e-6 }

// reduce builds the orbits of the grid under ±ops. It works in integer
// grid coordinates: with q_k = (a_k + s_k)/N_k, an operation compatible
// with the grid maps a to a'_k = Σ_l M_kl a_l + c_k (mod N_k), with
// M_kl = S_kl N_k/N_l and c_k = Σ_l S_kl N_k s_l/N_l − s_k both integers
// (gridCompatible checked that); time reversal maps a'_k to −a'_k − 2 s_k.
// It polls ctx every reducePoll grid points.
func reduce(ctx context.Context, ops []SymOp, spec GridSpec) (*IrreducibleGrid, error) {
	n := spec.Count()
	N := spec.Mesh
	var off [3]float64
	var tr [3]int // −2 s_k
	for k := range off {
		off[k] = spec.Offset(k)
		tr[k] = -int(math.Round(2 * off[k]))
	}
	type intOp struct {
		m [3][3]int
		c [3]int
	}
	iops := make([]intOp, len(ops))
	for x, op := range ops {
		for k := 0; k < 3; k++ {
			cf := -off[k]
			for l := 0; l < 3; l++ {
				iops[x].m[k][l] = int(math.Round(float64(op.QRot[k][l]*N[k]) / float64(N[l])))
				cf += float64(op.QRot[k][l]) * float64(N[k]) * off[l] / float64(N[l])
			}
			iops[x].c[k] = int(math.Round(cf))
		}
	}
	mod := func(x, m int) int {
		x %= m
		if x < 0 {
			x += m
		}
		return x
	}
	// Irr and Mult get the capacity of the bound on their length (every
	// group here holds time reversal) and are trimmed at the end, so the
	// memory reduce takes is known in advance (see GridModesCost).
	ub := IrreducibleUpperBound(n, spec.dim)
	ir := &IrreducibleGrid{Spec: spec, Ops: ops, Slot: make([]int32, n), OpIndex: make([]int16, n),
		Irr: make([]int, 0, ub), Mult: make([]int, 0, ub)}
	visited := make([]bool, n)
	for g := 0; g < n; g++ {
		if g%reducePoll == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		if visited[g] {
			continue
		}
		a := [3]int{g / (N[1] * N[2]), (g / N[2]) % N[1], g % N[2]}
		slot := int32(len(ir.Irr))
		mult := 0
		for k := range iops {
			op := &iops[k]
			var img, neg [3]int
			for x := 0; x < 3; x++ {
				v := op.m[x][0]*a[0] + op.m[x][1]*a[1] + op.m[x][2]*a[2] + op.c[x]
				img[x] = mod(v, N[x])
				neg[x] = mod(-v+tr[x], N[x])
			}
			for sign, c := range [2][3]int{img, neg} {
				h := (c[0]*N[1]+c[1])*N[2] + c[2]
				if visited[h] {
					continue
				}
				visited[h] = true
				ir.Slot[h] = slot
				if sign == 0 {
					ir.OpIndex[h] = int16(k)
				} else {
					ir.OpIndex[h] = int16(-k - 1)
				}
				mult++
			}
		}
		ir.Irr = append(ir.Irr, g)
		ir.Mult = append(ir.Mult, mult)
	}
	if len(ir.Irr) < cap(ir.Irr)/2 {
		ir.Irr = append([]int(nil), ir.Irr...)
		ir.Mult = append([]int(nil), ir.Mult...)
	}
	return ir, nil
}

// reducePoll is the number of grid points between two polls of the
// context in reduce: each costs at most 2·48 images, so a poll every
// 4 096 points is a fraction of a millisecond apart.
const reducePoll = 4096

// IrreducibleUpperBound bounds the number of irreducible points of an
// n-point grid of a d-dimensional crystal under any symmetry: time
// reversal alone pairs every point with another except those fixed by
// q → −q (at most 2^d of them), so at most (n + 2^d)/2 orbits remain.
func IrreducibleUpperBound(n, dim int) int {
	d := min(max(dim, 1), 3)
	return min(n, (n+(1<<d)+1)/2)
}

// unfoldSiteWeights fills the site weights of grid point g from those of
// its representative: the share of site Perm[i] at q_g equals the share of
// site i at q (time reversal conjugates the eigenvector and leaves shares
// unchanged).
func unfoldSiteWeights(op *SymOp, nmodes, nsites int, src, dst []float64) {
	for k := 0; k < nmodes; k++ {
		for i := 0; i < nsites; i++ {
			dst[k*nsites+op.Perm[i]] = src[k*nsites+i]
		}
	}
}

// unfoldEigvecs rotates the eigenvectors of the representative q into
// those at the image q' = S q: e'_{π(i)α} = exp(−2πi q'·L_i) Σ_β C_αβ e_{iβ}
// (from D(q') = U D(q) U†, see rotateD), conjugated when time reversal is
// applied.
func unfoldEigvecs(op *SymOp, timeReversal bool, qImage [3]float64, p, nsites int, src, dst []complex128) {
	nm := p * nsites
	if timeReversal {
		// q_g = −S q: the eigenvector at S q is needed before conjugation.
		for a := range qImage {
			qImage[a] = -qImage[a]
		}
	}
	for i := 0; i < nsites; i++ {
		var arg float64
		for a := 0; a < 3; a++ {
			arg += qImage[a] * float64(op.Shift[i][a])
		}
		ph := cmplx.Rect(1, -2*math.Pi*arg)
		pi := op.Perm[i]
		for k := 0; k < nm; k++ {
			for a := 0; a < p; a++ {
				var z complex128
				for b := 0; b < p; b++ {
					z += complex(op.Cart[a][b], 0) * src[k*nm+i*p+b]
				}
				z *= ph
				if timeReversal {
					z = cmplx.Conj(z)
				}
				dst[k*nm+pi*p+a] = z
			}
		}
	}
}

// Bytes is the memory held by the reduction tables: Slot (4 B) and
// OpIndex (2 B) per grid point, Irr and Mult (8 B each) per irreducible
// point.
func (ir *IrreducibleGrid) Bytes() int64 {
	return int64(6*len(ir.Slot) + 16*len(ir.Irr))
}

// lru is a small mutex-guarded LRU bounded by entry count and, when size
// is set, by the sum of the entries' sizes.
type lru[V any] struct {
	mu       sync.Mutex // guards ll, items and bytes
	max      int
	maxBytes int
	size     func(V) int // nil: entries have no size
	bytes    int
	ll       *list.List
	items    map[string]*list.Element
}

type lruEntry[V any] struct {
	key string
	val V
}

func newLRU[V any](max int) *lru[V] {
	return &lru[V]{max: max, ll: list.New(), items: map[string]*list.Element{}}
}

func newSizedLRU[V any](max, maxBytes int, size func(V) int) *lru[V] {
	c := newLRU[V](max)
	c.maxBytes, c.size = maxBytes, size
	return c
}

func (c *lru[V]) sizeOf(v V) int {
	if c.size == nil {
		return 0
	}
	return c.size(v)
}

func (c *lru[V]) get(key string) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.items[key]; ok {
		c.ll.MoveToFront(e)
		return e.Value.(*lruEntry[V]).val, true
	}
	var zero V
	return zero, false
}

func (c *lru[V]) put(key string, v V) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.size != nil && c.sizeOf(v) > c.maxBytes {
		return // larger than the whole cache: not kept
	}
	if e, ok := c.items[key]; ok {
		old := e.Value.(*lruEntry[V])
		c.bytes += c.sizeOf(v) - c.sizeOf(old.val)
		old.val = v
		c.ll.MoveToFront(e)
	} else {
		c.items[key] = c.ll.PushFront(&lruEntry[V]{key, v})
		c.bytes += c.sizeOf(v)
	}
	for c.ll.Len() > c.max || (c.size != nil && c.bytes > c.maxBytes) {
		e := c.ll.Back()
		c.ll.Remove(e)
		ent := e.Value.(*lruEntry[V])
		delete(c.items, ent.key)
		c.bytes -= c.sizeOf(ent.val)
	}
}

// unfold spreads the modes computed at the irreducible points (c, indexed
// by position in ir.Irr) onto every point of the grid.
func (m *Model) unfold(ctx context.Context, ir *IrreducibleGrid, c *GridModes, opt GridOptions) (*GridModes, error) {
	pts := c.Points
	nm, ns, p := c.NModes, c.NSites, c.P
	pairs := p * (p + 1) / 2
	g := &GridModes{ModelHash: c.ModelHash, Spec: c.Spec, Points: pts, NModes: nm, NSites: ns, P: p,
		FreqTHz: make([]float64, len(pts)*nm), Diagonalized: c.Diagonalized, irr: ir, cache: opt.Cache}
	if opt.Projections {
		g.SiteWeight = make([]float64, len(pts)*nm*ns)
	}
	if opt.Eigenvectors {
		g.Eigvecs = make([]complex128, len(pts)*nm*nm)
	}
	if opt.SiteTensors {
		g.SiteTensor = make([]float64, len(pts)*nm*ns*pairs)
	}
	err := parallelRange(ctx, len(pts), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			s := int(ir.Slot[i])
			copy(g.FreqTHz[i*nm:(i+1)*nm], c.FreqTHz[s*nm:(s+1)*nm])
			if !vecOpts(opt) {
				continue
			}
			k := int(ir.OpIndex[i])
			tr := k < 0
			if tr {
				k = -k - 1
			}
			op := &ir.Ops[k]
			if opt.Projections {
				unfoldSiteWeights(op, nm, ns, c.SiteWeight[s*nm*ns:(s+1)*nm*ns], g.SiteWeight[i*nm*ns:(i+1)*nm*ns])
			}
			if opt.SiteTensors {
				unfoldSiteTensors(op, nm, ns, p, c.SiteTensor[s*nm*ns*pairs:(s+1)*nm*ns*pairs], g.SiteTensor[i*nm*ns*pairs:(i+1)*nm*ns*pairs])
			}
			if opt.Eigenvectors {
				unfoldEigvecs(op, tr, pts[i].Q, p, ns, c.Eigvecs[s*nm*nm:(s+1)*nm*nm], g.Eigvecs[i*nm*nm:(i+1)*nm*nm])
			}
		}
	})
	if err != nil {
		return nil, err
	}
	return g, nil
}

func vecOpts(o GridOptions) bool { return o.Projections || o.Eigenvectors || o.SiteTensors }

// unfoldSiteTensors maps the per-site tensors t_ab = Re(e_a e_b*) of the
// representative to the image point: site Perm[i] gets C t_i Cᵀ (C the p×p
// Cartesian rotation; the phase of unfoldEigvecs cancels in e e†, and time
// reversal conjugates e e†, leaving its real part unchanged).
func unfoldSiteTensors(op *SymOp, nmodes, nsites, p int, src, dst []float64) {
	pairs := p * (p + 1) / 2
	var t, r [3][3]float64
	for k := 0; k < nmodes; k++ {
		for i := 0; i < nsites; i++ {
			in := src[(k*nsites+i)*pairs : (k*nsites+i+1)*pairs]
			x := 0
			for a := 0; a < p; a++ {
				for b := a; b < p; b++ {
					t[a][b], t[b][a] = in[x], in[x]
					x++
				}
			}
			for a := 0; a < p; a++ {
				for b := 0; b < p; b++ {
					var v float64
					for c := 0; c < p; c++ {
						for e := 0; e < p; e++ {
							v += op.Cart[a][c] * t[c][e] * op.Cart[b][e]
						}
					}
					r[a][b] = v
				}
			}
			out := dst[(k*nsites+op.Perm[i])*pairs : (k*nsites+op.Perm[i]+1)*pairs]
			x = 0
			for a := 0; a < p; a++ {
				for b := a; b < p; b++ {
					out[x] = r[a][b]
					x++
				}
			}
		}
	}
}
