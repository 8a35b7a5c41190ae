package main

// Output of the heat subcommands: table, CSV (columns stated in each
// command's help and the README) and JSON.

import (
	"fmt"
	"io"
	"strconv"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// gammaCell prints γ, or "undefined" where it is not defined.
func gammaCell(g float64, ok bool, prec int) string {
	if !ok {
		return "undefined"
	}
	if prec < 0 {
		return num(g)
	}
	return strconv.FormatFloat(g, 'f', prec, 64)
}

func writeGruneisen(w io.Writer, format string, r *modegridv1.ComputeGruneisenResponse) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	if len(r.GetAverages()) > 0 {
		return writeGammaAverages(w, format, r)
	}
	if format == "csv" {
		c := newCSV(w)
		c.row("q1", "q2", "q3", "distance_invA", "label", "branch", "frequency_thz", "gamma")
		for _, p := range r.GetPoints() {
			q := p.GetQ()
			for k, f := range p.GetFrequenciesThz() {
				c.row(num(q.GetQ1()), num(q.GetQ2()), num(q.GetQ3()), num(p.GetDistanceInvA()), p.GetLabel(), strconv.Itoa(k+1), num(f), gammaCell(p.GetGamma()[k], p.GetDefined()[k], -1))
			}
		}
		return c.flush()
	}
	t := newTable(w)
	t.row("q", "label", "branch", "ν (THz)", "γ")
	for _, p := range r.GetPoints() {
		q := p.GetQ()
		qs := fmt.Sprintf("(%s, %s, %s)", f4(q.GetQ1()), f4(q.GetQ2()), f4(q.GetQ3()))
		for k, f := range p.GetFrequenciesThz() {
			t.row(qs, displayLabel(p.GetLabel()), strconv.Itoa(k+1), f4(f), gammaCell(p.GetGamma()[k], p.GetDefined()[k], 4))
			qs = ""
		}
	}
	if err := t.flush(); err != nil {
		return err
	}
	return gruneisenFooter(w, r)
}

func gruneisenFooter(w io.Writer, r *modegridv1.ComputeGruneisenResponse) error {
	_, err := fmt.Fprintf(w, "reference volume: models[%d], %s Å³ of %d volumes; weakest mode match across volumes: overlap %s\n",
		r.GetReference(), f4(r.GetVolumesA3()[r.GetReference()]), len(r.GetVolumesA3()), f4(r.GetMinOverlap()))
	return err
}

func writeGammaAverages(w io.Writer, format string, r *modegridv1.ComputeGruneisenResponse) error {
	if format == "csv" {
		c := newCSV(w)
		c.row("T_K", "gamma_mean")
		for _, a := range r.GetAverages() {
			c.row(num(a.GetTemperatureK()), gammaCell(a.GetGamma(), a.GetDefined(), -1))
		}
		return c.flush()
	}
	t := newTable(w)
	t.row("T (K)", "γ (Cv-weighted mean)")
	for _, a := range r.GetAverages() {
		t.row(strconv.FormatFloat(a.GetTemperatureK(), 'f', 2, 64), gammaCell(a.GetGamma(), a.GetDefined(), 4))
	}
	if err := t.flush(); err != nil {
		return err
	}
	return gruneisenFooter(w, r)
}

// qhaCapacities are Cv and Cp of a point per mole of atoms or of cells.
func qhaCapacities(p *modegridv1.QuasiHarmonicPoint, perCell bool) (cv, cp float64) {
	if perCell {
		return p.GetHeatCapacityVJPerMolK(), p.GetHeatCapacityPJPerMolK()
	}
	return p.GetHeatCapacityVJPerMolAtomsK(), p.GetHeatCapacityPJPerMolAtomsK()
}

func writeQHA(w io.Writer, format string, r *modegridv1.ComputeQuasiHarmonicResponse, perCell bool) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	per, unit := "molatom", "J/(mol-atoms·K)"
	if perCell {
		per, unit = "molcell", "J/(mol·K)"
	}
	if format == "csv" {
		c := newCSV(w)
		c.row("T_K", "V_A3", "alpha_V_per_K", "alpha_L_per_K", "B_T_GPa", "Cv_J_per_"+per+"_K", "Cp_J_per_"+per+"_K", "gamma", "G_eV", "fit_rms_eV", "bracketed")
		for _, p := range r.GetPoints() {
			if !p.GetFound() {
				c.row(num(p.GetTemperatureK()), "no minimum", "", "", "", "", "", "", "", "", "no")
				continue
			}
			cv, cp := qhaCapacities(p, perCell)
			c.row(num(p.GetTemperatureK()), num(p.GetVolumeA3()), num(p.GetVolumeExpansionPerK()), num(p.GetLinearExpansionPerK()), num(p.GetBulkModulusGpa()),
				num(cv), num(cp), gammaCell(p.GetGruneisen(), p.GetGruneisenDefined(), -1), num(p.GetGibbsEnergyEv()), num(p.GetFit().GetRmsResidualEv()), yesNo(p.GetBracketed()))
		}
		return c.flush()
	}
	t := newTable(w)
	t.row("T (K)", "V (Å³)", "αV (1e-6/K)", "αL (1e-6/K)", "B_T (GPa)", "Cv ("+unit+")", "Cp ("+unit+")", "γ", "fit rms (meV)", "")
	for _, p := range r.GetPoints() {
		if !p.GetFound() {
			t.row(strconv.FormatFloat(p.GetTemperatureK(), 'f', 2, 64), "no minimum", "", "", "", "", "", "", "", "!")
			continue
		}
		cv, cp := qhaCapacities(p, perCell)
		mark := ""
		if !p.GetBracketed() {
			mark = "extrapolated"
		}
		t.row(strconv.FormatFloat(p.GetTemperatureK(), 'f', 2, 64), strconv.FormatFloat(p.GetVolumeA3(), 'f', 5, 64),
			strconv.FormatFloat(p.GetVolumeExpansionPerK()*1e6, 'f', 4, 64), strconv.FormatFloat(p.GetLinearExpansionPerK()*1e6, 'f', 4, 64),
			strconv.FormatFloat(p.GetBulkModulusGpa(), 'f', 3, 64), f4(cv), f4(cp), gammaCell(p.GetGruneisen(), p.GetGruneisenDefined(), 4),
			strconv.FormatFloat(p.GetFit().GetRmsResidualEv()*1e3, 'f', 4, 64), mark)
	}
	if err := t.flush(); err != nil {
		return err
	}
	s := r.GetStaticFit()
	_, err := fmt.Fprintf(w, "static energy fit: V0 %s Å³, B0 %s GPa, B0' %s (rms residual %s meV); pressure %s GPa; %d volumes\n",
		f4(s.GetV0A3()), f4(s.GetB0Gpa()), f4(s.GetB0Prime()), f4(s.GetRmsResidualEv()*1e3), num(r.GetPressureGpa()), len(r.GetVolumesA3()))
	return err
}

func writeConductivity(w io.Writer, format string, r *modegridv1.ComputeConductivityResponse, cumulative bool) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	if cumulative {
		return writeCumulative(w, format, r)
	}
	if format == "csv" {
		c := newCSV(w)
		c.row("sample", "T_K", "kappa_W_per_mK", "kxx", "kyy", "kzz", "kxy", "kxz", "kyz")
		for _, s := range r.GetSeries() {
			for _, p := range s.GetPoints() {
				k := p.GetKappaWPerMK()
				c.row(sampleName(s.GetSample()), num(p.GetTemperatureK()), num(p.GetKappaMeanWPerMK()), num(k[0]), num(k[4]), num(k[8]), num(k[1]), num(k[2]), num(k[5]))
			}
		}
		return c.flush()
	}
	t := newTable(w)
	t.row("sample", "T (K)", "κ (W/(m·K))", "κxx", "κyy", "κzz")
	for _, s := range r.GetSeries() {
		name := sampleName(s.GetSample())
		for _, p := range s.GetPoints() {
			k := p.GetKappaWPerMK()
			t.row(name, strconv.FormatFloat(p.GetTemperatureK(), 'f', 2, 64), sig4(p.GetKappaMeanWPerMK()), sig4(k[0]), sig4(k[4]), sig4(k[8]))
			name = ""
		}
	}
	if err := t.flush(); err != nil {
		return err
	}
	return conductivityFooter(w, r)
}

// sig4 prints 4 significant digits (κ spans decades across sizes).
func sig4(x float64) string { return strconv.FormatFloat(x, 'g', 4, 64) }

func conductivityFooter(w io.Writer, r *modegridv1.ComputeConductivityResponse) error {
	if r.GetUmklappThetaK() > 0 {
		if _, err := fmt.Fprintf(w, "Umklapp constants: θ %s K, v̄ %s km/s, M̄ %s u\n", f4(r.GetUmklappThetaK()), f4(r.GetUmklappVelocityKmS()), f4(r.GetUmklappMeanMassAmu())); err != nil {
			return err
		}
	}
	if r.GetDefectGamma() > 0 {
		if _, err := fmt.Fprintf(w, "point-defect mass variance Γ: %s\n", strconv.FormatFloat(r.GetDefectGamma(), 'g', 4, 64)); err != nil {
			return err
		}
	}
	_, err := fmt.Fprintln(w, "model estimates: check the scattering parameters against measured conductivities")
	return err
}

func writeCumulative(w io.Writer, format string, r *modegridv1.ComputeConductivityResponse) error {
	if format == "csv" {
		c := newCSV(w)
		c.row("sample", "mean_free_path_m", "kappa_by_mfp_W_per_mK", "frequency_thz", "kappa_by_frequency_W_per_mK")
		for _, s := range r.GetSeries() {
			cu := s.GetCumulative()
			for i := range cu.GetMeanFreePathM() {
				c.row(sampleName(s.GetSample()), num(cu.GetMeanFreePathM()[i]), num(cu.GetKappaByMeanFreePath()[i]), num(cu.GetFrequencyThz()[i]), num(cu.GetKappaByFrequency()[i]))
			}
		}
		return c.flush()
	}
	t := newTable(w)
	t.row("sample", "Λ ≤", "κ(Λ) (W/(m·K))", "ν ≤ (THz)", "κ(ν) (W/(m·K))")
	for _, s := range r.GetSeries() {
		cu := s.GetCumulative()
		name := sampleName(s.GetSample())
		for i := range cu.GetMeanFreePathM() {
			t.row(name, lengthName(cu.GetMeanFreePathM()[i]), sig4(cu.GetKappaByMeanFreePath()[i]), f4(cu.GetFrequencyThz()[i]), sig4(cu.GetKappaByFrequency()[i]))
			name = ""
		}
	}
	if err := t.flush(); err != nil {
		return err
	}
	return conductivityFooter(w, r)
}
