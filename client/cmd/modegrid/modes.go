package main

import (
	"io"
	"math"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const modesSummary = `Normal-mode frequencies at explicit q-points (--q), on a Monkhorst–Pack
grid (--grid, --shift) or for a finite crystal of N cells (--cells). q is in
fractional reciprocal coordinates; imaginary modes are negative numbers.
--velocities adds the group velocity (km/s, Cartesian x, y, z) of every
mode, --eigenvectors its normalised eigenvector (one complex component per
site and axis, cell phase convention: the mode shape of site s in cell n is
e_s·exp(2πi q·n)/sqrt(m_s)); both give one row per q-point and branch.
For a polar model (Born charges) --gamma-dir a,b,c gives the direction
(fractional reciprocal) from which every Γ point of --q is approached:
the LO–TO splitting of that direction; without it, and on grids, Γ takes
the analytic part only (LO and TO not split).`

func cmdModes(args []string, e *env) error {
	c := newModelCommand("modes", false)
	fs := c.fs
	var qs qsetFlags
	qs.register(fs, true)
	unit := fs.String("unit", "thz", "frequency unit: thz, mev or cm-1")
	vectors := fs.Bool("eigenvectors", false, "also give each mode's normalised eigenvector (complex, per site and axis)")
	velocities := fs.Bool("velocities", false, "also give each mode's group velocity (km/s, Cartesian)")
	gammaDir := fs.String("gamma-dir", "", "with --q, for a polar model: direction a,b,c (fractional reciprocal) of approach to its Γ points")
	if err := c.parse(args, e, modesSummary); err != nil {
		return err
	}
	u, err := parseUnit(*unit)
	if err != nil {
		return usagef("%v", err)
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, p := dims(crystal)
	set, err := qs.set(d, false)
	if err != nil {
		return err
	}
	if *gammaDir != "" {
		if err := setGammaDirs(set, *gammaDir); err != nil {
			return err
		}
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	src := c.source(crystal)
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: src, Qpoints: set, Unit: u, Eigenvectors: *vectors, GroupVelocities: *velocities},
		client.Progress(func(done, total int) { e.prog.update("modes", done, total) }))
	e.prog.clear()
	if err != nil {
		return err
	}
	x := modesExtras{vectors: *vectors, velocities: *velocities, pol: p}
	for _, s := range crystal.GetSites() {
		x.labels = append(x.labels, s.GetLabel())
	}
	return c.out.write(e.stdout, func(w io.Writer) error { return writeModes(w, c.out.format, resp, x) })
}

// setGammaDirs gives every Γ point (integer coordinates) of the list set
// the direction parsed from s, the others none.
func setGammaDirs(set *modegridv1.QPointSet, s string) error {
	l := set.GetList()
	if l == nil {
		return usagef("--gamma-dir needs --q (a grid's Γ takes the analytic part only)")
	}
	v, err := parseVec(s)
	if err != nil {
		return usagef("--gamma-dir: %v", err)
	}
	if v == [3]float64{} {
		return usagef("--gamma-dir must not be 0,0,0")
	}
	for _, p := range l.GetPoints() {
		d := &modegridv1.QPoint{}
		if isInteger(p.GetQ1()) && isInteger(p.GetQ2()) && isInteger(p.GetQ3()) {
			d = &modegridv1.QPoint{Q1: v[0], Q2: v[1], Q3: v[2]}
		}
		l.GammaDirections = append(l.GammaDirections, d)
	}
	return nil
}

// isInteger reports whether x is a whole number (a component of Γ).
func isInteger(x float64) bool { return x == math.Trunc(x) }
