package main

// Writers of the scattering commands. CSV is long format, one row per
// (Q, E) of the map, with the units in the column names; tables list what
// a person reads: the lines at each Q, a summary of each powder row.

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// scatterOutput is a single-crystal response with what its columns need.
type scatterOutput struct {
	resp  *modegridv1.ComputeScatteringResponse
	kind  string // "path", "list" or "slice"
	probe modegridv1.Probe
	frame modegridv1.QFrame
	a     float64 // conventional lattice constant, Å (frame conv)
}

// sColumn names the CSV column of S: its unit per probe and energy unit.
func sColumn(probe modegridv1.Probe, u modegridv1.FrequencyUnit) string {
	if probe == modegridv1.Probe_PROBE_XRAY {
		return "s_electrons2_per_" + unitName(u)
	}
	return "s_barn_per_sr_" + unitName(u)
}

// weightUnit is the unit of a line weight for CSV names and table heads.
func weightUnit(probe modegridv1.Probe) (csv, human string) {
	if probe == modegridv1.Probe_PROBE_XRAY {
		return "electrons2", "electrons²"
	}
	return "barn_per_sr", "barn/sr"
}

// leadColumns are the columns before Q: the path distance and corner
// label, the slice coordinates, or none for a list.
func (o scatterOutput) leadColumns() []string {
	switch o.kind {
	case "path":
		return []string{"distance_invA", "label"}
	case "slice":
		return []string{"u", "v"}
	}
	return nil
}

func (o scatterOutput) lead(p *modegridv1.ScatteringPoint) []string {
	switch o.kind {
	case "path":
		return []string{num(p.GetDistanceInvA()), p.GetLabel()}
	case "slice":
		return []string{num(p.GetU()), num(p.GetV())}
	}
	return nil
}

// qColumns are Q fractional (the model's reciprocal lattice), Cartesian
// (1/Å) and, in the conventional frame, (h, k, l) in units of 2π/a.
func (o scatterOutput) qColumns() []string {
	c := []string{"q1", "q2", "q3", "qx_invA", "qy_invA", "qz_invA"}
	if o.frame == modegridv1.QFrame_Q_FRAME_CONVENTIONAL {
		c = append(c, "h", "k", "l")
	}
	return c
}

func (o scatterOutput) q(p *modegridv1.ScatteringPoint) []string {
	f, c := p.GetQFrac(), p.GetQCartInvA()
	out := []string{num(f.GetQ1()), num(f.GetQ2()), num(f.GetQ3()), num(c.GetQ1()), num(c.GetQ2()), num(c.GetQ3())}
	if o.frame == modegridv1.QFrame_Q_FRAME_CONVENTIONAL {
		s := o.a / (2 * math.Pi)
		out = append(out, num(c.GetQ1()*s), num(c.GetQ2()*s), num(c.GetQ3()*s))
	}
	return out
}

// writeMap writes S on the map: JSON, or CSV with one row per Q and E.
func (o scatterOutput) writeMap(w io.Writer, format string) error {
	if format == "json" {
		return writeJSON(w, o.resp)
	}
	c := newCSV(w)
	head := append(append(o.leadColumns(), o.qColumns()...), "energy_"+unitName(o.resp.GetUnit()), sColumn(o.probe, o.resp.GetUnit()))
	c.row(head...)
	for _, p := range o.resp.GetPoints() {
		pre := append(o.lead(p), o.q(p)...)
		for k, en := range o.resp.GetEnergies() {
			c.row(append(append([]string(nil), pre...), num(en), num(at(p.GetS(), k)))...)
		}
	}
	return c.flush()
}

// writeLines lists every mode at every Q with its energy and the weights
// of its lines at +E (the sample gains the phonon) and −E.
func (o scatterOutput) writeLines(w io.Writer, format string) error {
	u := o.resp.GetUnit()
	wcsv, whuman := weightUnit(o.probe)
	if format == "csv" {
		c := newCSV(w)
		c.row(append(append(o.leadColumns(), o.qColumns()...), "mode", "energy_"+unitName(u), "creation_"+wcsv, "annihilation_"+wcsv)...)
		for _, p := range o.resp.GetPoints() {
			pre := append(o.lead(p), o.q(p)...)
			for m, en := range p.GetModeEnergies() {
				c.row(append(append([]string(nil), pre...), strconv.Itoa(m+1), num(en), num(at(p.GetCreation(), m)), num(at(p.GetAnnihilation(), m)))...)
			}
		}
		return c.flush()
	}
	t := newTable(w)
	var head []string
	switch o.kind {
	case "path":
		head = []string{"distance (1/Å)", "label"}
	case "slice":
		head = []string{"u", "v"}
	}
	head = append(head, "q1", "q2", "q3", "|Q| (1/Å)", "mode", fmt.Sprintf("E (%s)", unitLabel(u)), "+E ("+whuman+")", "−E ("+whuman+")")
	t.row(head...)
	// Weights below 1e-12 of the largest are rounding (a transverse mode
	// with Q along q, say) and print as 0; CSV keeps every digit.
	top := 0.0
	for _, p := range o.resp.GetPoints() {
		top = max(top, slices.Max(append([]float64{0}, p.GetCreation()...)))
	}
	g := func(x float64) string {
		if math.Abs(x) < 1e-12*top {
			x = 0
		}
		return strconv.FormatFloat(x, 'g', 5, 64)
	}
	for _, p := range o.resp.GetPoints() {
		f, c := p.GetQFrac(), p.GetQCartInvA()
		var pre []string
		switch o.kind {
		case "path":
			pre = []string{f4(p.GetDistanceInvA()), displayLabel(p.GetLabel())}
		case "slice":
			pre = []string{f4(p.GetU()), f4(p.GetV())}
		}
		pre = append(pre, f4(f.GetQ1()), f4(f.GetQ2()), f4(f.GetQ3()), f4(math.Hypot(math.Hypot(c.GetQ1(), c.GetQ2()), c.GetQ3())))
		for m, en := range p.GetModeEnergies() {
			t.row(append(append([]string(nil), pre...), strconv.Itoa(m+1), f4(en), g(at(p.GetCreation(), m)), g(at(p.GetAnnihilation(), m)))...)
		}
	}
	if err := t.flush(); err != nil {
		return err
	}
	return scatterFooter(w, o.resp)
}

// scatterFooter states what the weights and S are, under a table.
func scatterFooter(w io.Writer, r *modegridv1.ComputeScatteringResponse) error {
	dw := "off"
	if m := r.GetDebyeWallerMesh(); len(m) > 0 {
		dw = fmt.Sprintf("on (%s grid", joinMesh(m))
		if r.GetDebyeWallerExtrapolated() {
			dw += ", thermal part extrapolated"
		}
		dw += ")"
	}
	_, err := fmt.Fprintf(w, "S in %s; Debye–Waller factors %s; %s\n", r.GetIntensityUnit(), dw, scatterSources(r))
	return err
}

// scatterSources says where each site's length came from, once per label.
func scatterSources(r *modegridv1.ComputeScatteringResponse) string {
	seen := map[string]bool{}
	s := "lengths:"
	for _, st := range r.GetSites() {
		if seen[st.GetLabel()] {
			continue
		}
		seen[st.GetLabel()] = true
		s += fmt.Sprintf(" %s b = %s fm, σ_inc = %s barn (%s);", st.GetLabel(), strconv.FormatFloat(st.GetCoherentFm(), 'g', 5, 64),
			strconv.FormatFloat(st.GetIncoherentBarn(), 'g', 5, 64), st.GetSource())
	}
	return s[:len(s)-1]
}

func joinMesh(m []uint32) string {
	s := ""
	for i, n := range m {
		if i > 0 {
			s += "×"
		}
		s += strconv.Itoa(int(n))
	}
	return s
}

// writePowder writes a powder map: JSON, CSV with one row per |Q| and E,
// or a table of each row's quadrature, integral and peak.
func writePowder(w io.Writer, format string, r *modegridv1.ComputeScatteringResponse, probe modegridv1.Probe) error {
	u := r.GetUnit()
	switch format {
	case "json":
		return writeJSON(w, r)
	case "csv":
		c := newCSV(w)
		c.row("q_invA", "energy_"+unitName(u), sColumn(probe, u))
		for _, row := range r.GetPowder() {
			for k, en := range r.GetEnergies() {
				c.row(num(row.GetQInvA()), num(en), num(at(row.GetS(), k)))
			}
		}
		return c.flush()
	}
	_, whuman := weightUnit(probe)
	t := newTable(w)
	t.row("|Q| (1/Å)", "directions", "change", "∫S dE ("+whuman+")", fmt.Sprintf("peak E (%s)", unitLabel(u)), "peak S")
	es := r.GetEnergies()
	step := 0.0
	if len(es) > 1 {
		step = es[1] - es[0]
	}
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', 5, 64) }
	for _, row := range r.GetPowder() {
		sum, peak, peakE := 0.0, math.Inf(-1), 0.0
		for k, v := range row.GetS() {
			sum += v * step
			if v > peak && k < len(es) {
				peak, peakE = v, es[k]
			}
		}
		t.row(f4(row.GetQInvA()), strconv.Itoa(int(row.GetDirections())), g(row.GetChange()), g(sum), f4(peakE), g(peak))
	}
	if err := t.flush(); err != nil {
		return err
	}
	terms := "coherent one-phonon term"
	if r.GetPowderIncoherent() {
		terms += " + incoherent one-phonon term (" + joinMesh(r.GetPowderIncoherentMesh()) + " DOS)"
	}
	n := r.GetPowderUnconvergedRows()
	if _, err := fmt.Fprintf(w, "%s; %d row%s above the tolerance; ", terms, n, plural(int(n))); err != nil {
		return err
	}
	return scatterFooter(w, r)
}

// writeWeightedDOS writes the neutron-weighted DOS and its normalised form.
func writeWeightedDOS(w io.Writer, format string, r *modegridv1.ComputeScatteringResponse) error {
	u := r.GetUnit()
	switch format {
	case "json":
		return writeJSON(w, r)
	case "csv":
		c := newCSV(w)
		c.row("energy_"+unitName(u), "weighted_dos_barn_per_amu_"+unitName(u), "weighted_dos_normalized_per_"+unitName(u))
		for k, en := range r.GetEnergies() {
			c.row(num(en), num(at(r.GetWeightedDos(), k)), num(at(r.GetWeightedDosNormalized(), k)))
		}
		return c.flush()
	}
	t := newTable(w)
	ul := unitLabel(u)
	t.row(fmt.Sprintf("E (%s)", ul), fmt.Sprintf("G (barn/(amu·%s))", ul), fmt.Sprintf("normalised (1/%s)", ul))
	g := func(x float64) string { return strconv.FormatFloat(x, 'f', 5, 64) }
	for k, en := range r.GetEnergies() {
		t.row(f4(en), g(at(r.GetWeightedDos(), k)), g(at(r.GetWeightedDosNormalized(), k)))
	}
	if err := t.flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintln(w, scatterSources(r))
	return err
}
