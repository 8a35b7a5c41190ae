package scatter

import (
	"fmt"

	"github.com/materials-lab/modegrid/physics"
)

// Given is what a request says about the scatterers of one label (Site <
// 0) or one site.
type Given struct {
	Label          string
	Site           int
	CoherentFm     *float64
	IncoherentBarn *float64
	FormFactor     *FormFactor
}

// Resolve gives every site of m its scatterer: a site entry first, then a
// label entry, then (neutrons) the built-in table by label and mass. It
// returns the scatterers, where each came from, and adds a violation under
// "scatterers[i]" (or "scatterers" for a site nobody named) for what is
// missing or wrong.
func Resolve(m *physics.Model, probe Probe, given []Given, vs *physics.Violations) ([]SiteScatterer, []string) {
	labels := m.Labels()
	bySite := map[int]int{}
	byLabel := map[string]int{}
	for i, g := range given {
		f := fmt.Sprintf("scatterers[%d]", i)
		switch {
		case g.Site >= 0 && g.Site >= m.Sites():
			vs.Add(f+".site", "site index %d out of range [0, %d)", g.Site, m.Sites())
		case g.Site >= 0:
			if _, dup := bySite[g.Site]; dup {
				vs.Add(f+".site", "site %d is named twice", g.Site)
			}
			bySite[g.Site] = i
		default:
			if !contains(labels, g.Label) {
				vs.Add(f+".label", "no site has label %q", g.Label)
			}
			if _, dup := byLabel[g.Label]; dup {
				vs.Add(f+".label", "label %q is named twice", g.Label)
			}
			byLabel[g.Label] = i
		}
		if probe == Neutron && g.CoherentFm == nil && g.IncoherentBarn != nil {
			vs.Add(f+".coherent_fm", "give the coherent length with the incoherent cross-section")
		}
		if probe == XRay && g.FormFactor == nil {
			vs.Add(f+".form_factor", "the X-ray probe needs a form factor")
		}
	}
	out := make([]SiteScatterer, m.Sites())
	src := make([]string, m.Sites())
	for j := range out {
		i, ok := bySite[j]
		if !ok {
			i, ok = byLabel[labels[j]]
		}
		if ok {
			g := given[i]
			if probe == XRay && g.FormFactor != nil {
				out[j].FormFactor = *g.FormFactor
				src[j] = "request"
				continue
			}
			if probe == Neutron && g.CoherentFm != nil {
				out[j].CoherentFm = *g.CoherentFm
				if g.IncoherentBarn != nil {
					out[j].IncoherentBarn = *g.IncoherentBarn
				}
				src[j] = "request"
				continue
			}
		}
		if probe == XRay {
			vs.Add("scatterers", "site %d (label %q) has no X-ray form factor: give one for its label or index", j, labels[j])
			continue
		}
		e, err := Lookup(labels[j], m.MassAmu(j))
		if err != nil {
			vs.Add("scatterers", "site %d: %v", j, err)
			continue
		}
		out[j] = SiteScatterer{CoherentFm: e.CoherentFm, IncoherentBarn: e.IncoherentBarn}
		src[j] = "built-in table (Sears 1992): " + e.Symbol
	}
	return out, src
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
