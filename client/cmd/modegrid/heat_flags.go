package main

import (
	"flag"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// conductivityFlags are the conductivity command's own flags.
type conductivityFlags struct {
	qs                           qsetFlags
	temps, samples, g2, branches string
	gammaModels, power           string
	specularity, gamma, b        float64
	theta, velocity, cumulativeK float64
	bins                         int
	isotopes, allowUnstable      bool
}

func (f *conductivityFlags) register(fs *flag.FlagSet) {
	f.qs.register(fs, false)
	fs.StringVar(&f.temps, "temps", "10:500:10", "temperatures in K: start:stop:step or a list")
	fs.StringVar(&f.samples, "samples", "bulk", `sample geometries, e.g. "film:100nm grain:1um wire:50nm bulk" (film:SIZE:NX,NY,NZ gives the normal)`)
	fs.Float64Var(&f.specularity, "specularity", 0, "specular fraction p of boundary reflections, 0 (diffuse) to 1")
	fs.BoolVar(&f.isotopes, "isotopes", false, "isotope scattering from the natural isotopes of each site's element (labels name elements)")
	fs.StringVar(&f.g2, "g2", "", "point-defect mass variance g₂ per site, comma-separated (instead of --isotopes)")
	fs.Float64Var(&f.gamma, "gruneisen", 0, "Umklapp scattering with this Grüneisen parameter for every mode")
	fs.StringVar(&f.branches, "gruneisen-branches", "", "Umklapp scattering with a Grüneisen parameter per branch, comma-separated")
	fs.StringVar(&f.gammaModels, "gruneisen-models", "", "Umklapp scattering with mode Grüneisen parameters from these model files at other volumes")
	fs.Float64Var(&f.b, "umklapp-b", 0, "the dimensionless constant b of the Umklapp rate (0: 1)")
	fs.Float64Var(&f.theta, "theta", 0, "θ of the Umklapp rate in K (0: the model's acoustic Debye temperature)")
	fs.Float64Var(&f.velocity, "velocity", 0, "v̄ of the Umklapp rate in km/s (0: the model's Debye mean sound velocity)")
	fs.StringVar(&f.power, "power", "", "a power-law rate A,n: A·(ν/1 THz)ⁿ in 1/s")
	fs.Float64Var(&f.cumulativeK, "cumulative", 0, "output the cumulative κ against mean free path and frequency at this temperature (K)")
	fs.IntVar(&f.bins, "bins", 0, "points of the cumulative curves (0: 100)")
	fs.BoolVar(&f.allowUnstable, "allow-unstable", false, "leave imaginary modes out instead of refusing an unstable model")
}

// request builds the ComputeConductivityRequest of the flags for crystal.
func (f *conductivityFlags) request(c *modelCommand, crystal *modegridv1.Crystal) (*modegridv1.ComputeConductivityRequest, error) {
	req := &modegridv1.ComputeConductivityRequest{Model: c.source(crystal), CumulativeTemperatureK: f.cumulativeK, AllowUnstable: f.allowUnstable}
	if f.bins < 0 {
		return nil, usagef("--bins must be ≥ 0")
	}
	req.CumulativeBins = uint32(f.bins)
	list, rng, err := parseTemps(f.temps)
	if err != nil {
		return nil, usagef("--temps: %v", err)
	}
	req.TemperaturesK, req.Range = list, rangeMsg(rng)
	if req.Samples, err = parseSamples(f.samples, f.specularity); err != nil {
		return nil, usagef("--samples: %v", err)
	}
	if err := f.scattering(req); err != nil {
		return nil, err
	}
	d, _ := dims(crystal)
	if req.Qpoints, err = f.qs.set(d, true); err != nil {
		return nil, err
	}
	for _, cr := range req.GetUmklapp().GetVolumeModels() {
		cr.EnforceSumRule, cr.SymmetryToleranceA, cr.Symmetrize = *c.sumRule, *c.symTol, *c.symmetrize
	}
	return req, nil
}

// scattering fills the bulk mechanisms of req from the flags.
func (f *conductivityFlags) scattering(req *modegridv1.ComputeConductivityRequest) error {
	if f.isotopes || f.g2 != "" {
		req.PointDefects = &modegridv1.PointDefectScattering{Enabled: true}
		if f.g2 != "" {
			g, err := parseNumberList(f.g2, "g₂")
			if err != nil {
				return usagef("--g2: %v", err)
			}
			req.PointDefects.SiteG2 = g
		}
	}
	given := 0
	u := &modegridv1.UmklappScattering{Enabled: true, B: f.b, ThetaK: f.theta, VelocityKmS: f.velocity}
	if f.gamma != 0 {
		u.Gruneisen = f.gamma
		given++
	}
	if f.branches != "" {
		g, err := parseNumberList(f.branches, "γ")
		if err != nil {
			return usagef("--gruneisen-branches: %v", err)
		}
		u.GruneisenPerBranch = g
		given++
	}
	if f.gammaModels != "" {
		cs, err := loadModels(f.gammaModels, "gruneisen-models")
		if err != nil {
			return err
		}
		for _, cr := range cs {
			u.VolumeModels = append(u.VolumeModels, &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: cr}})
		}
		given++
	}
	switch {
	case given > 1:
		return usagef("give one of --gruneisen, --gruneisen-branches and --gruneisen-models")
	case given == 1:
		req.Umklapp = u
	case f.b != 0 || f.theta != 0 || f.velocity != 0:
		return usagef("--umklapp-b, --theta and --velocity need Umklapp scattering: give --gruneisen, --gruneisen-branches or --gruneisen-models")
	}
	if f.power != "" {
		v, err := parseNumberList(f.power, "number")
		if err != nil || len(v) != 2 {
			return usagef("--power: want A,n (A in 1/s, n ≥ 0), got %q", f.power)
		}
		req.PowerLaw = &modegridv1.PowerLawScattering{Enabled: true, RatePerS: v[0], Exponent: v[1]}
	}
	return nil
}
