package transport

import (
	"math"
	"sort"

	"github.com/materials-lab/modegrid/physics"
)

// cumulative is the cumulative κ (trace/3) of geometry bd at temperature
// tK on bins points: each mode's share C|v|²τ/3 (times k_B and scale =
// 1/(NV)) accumulated by mean free path |v|τ (log-spaced from where 0.1 %
// of κ is reached to the longest) and by frequency (even spacing up to the
// highest).
func (md *modeData) cumulative(bd Boundary, tK, scale float64, bins int) *Cumulative {
	type share struct{ mfp, nu, k float64 }
	sh := make([]share, 0, len(md.nu))
	kappa := physics.THzToKelvin / tK
	u := tK * math.Exp(-md.theta/(3*tK))
	var top float64
	for i, f := range md.nu {
		if !md.keep[i] {
			continue
		}
		top = math.Max(top, f)
		v := md.vel[i]
		sp := math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
		r := md.rint[i] + md.ucoef[i]*u + boundaryRate(bd, v)
		c := modeHeat(kappa * f)
		if !(r > 0) || c == 0 || sp == 0 {
			continue
		}
		sh = append(sh, share{mfp: sp / r, nu: f, k: physics.BoltzmannJPerK * scale * c * sp * sp / r / 3})
	}
	out := &Cumulative{TempK: tK, MFPM: make([]float64, bins), KappaByMFP: make([]float64, bins),
		FreqTHz: make([]float64, bins), KappaByFreq: make([]float64, bins)}
	if len(sh) == 0 {
		return out
	}
	sort.Slice(sh, func(a, b int) bool { return sh[a].mfp < sh[b].mfp })
	// The axis starts where 0.1 % of κ is reached: modes of vanishing
	// velocity (zone boundaries) have mean free paths of 10⁻²⁰ m that
	// carry nothing and would stretch the axis over decades.
	var total float64
	for _, x := range sh {
		total += x.k
	}
	first, part := 0, 0.0
	for first < len(sh)-1 && part+sh[first].k < 1e-3*total {
		part += sh[first].k
		first++
	}
	lo, hi := math.Log(sh[first].mfp), math.Log(sh[len(sh)-1].mfp)
	j := 0
	var acc float64
	for b := 0; b < bins; b++ {
		x := hi
		if bins > 1 {
			x = lo + (hi-lo)*float64(b)/float64(bins-1)
		}
		out.MFPM[b] = math.Exp(x)
		if b == bins-1 {
			out.MFPM[b] = sh[len(sh)-1].mfp
		}
		for j < len(sh) && sh[j].mfp <= out.MFPM[b] {
			acc += sh[j].k
			j++
		}
		out.KappaByMFP[b] = acc
	}
	sort.Slice(sh, func(a, b int) bool { return sh[a].nu < sh[b].nu })
	j, acc = 0, 0
	for b := 0; b < bins; b++ {
		out.FreqTHz[b] = top * float64(b+1) / float64(bins)
		if b == bins-1 {
			out.FreqTHz[b] = top
		}
		for j < len(sh) && sh[j].nu <= out.FreqTHz[b] {
			acc += sh[j].k
			j++
		}
		out.KappaByFreq[b] = acc
	}
	return out
}
