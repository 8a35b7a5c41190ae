package main

import (
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// thermalBasis is the amount of crystal the thermal properties are given
// for: a mole of atoms (the default: the classical limit of Cv reads p·R,
// 3R for a 3D crystal), a mole of cells (formula units) or a kilogram.
// Every column name, table heading and axis label states it.
type thermalBasis int

const (
	basisAtoms thermalBasis = iota // per mole of atoms (sites)
	basisCells                     // per mole of cells (formula units)
	basisKg                        // per kilogram
)

// parseBasis reads --basis.
func parseBasis(s string) (thermalBasis, error) {
	switch s {
	case "atoms":
		return basisAtoms, nil
	case "cells":
		return basisCells, nil
	case "kg":
		return basisKg, nil
	}
	return 0, fmt.Errorf("--basis must be atoms, cells or kg, got %q", s)
}

// values returns Cv, S (J/K per basis) and F, U (kJ per basis) of p.
func (b thermalBasis) values(p *modegridv1.ThermalPoint) (cv, s, f, u float64) {
	switch b {
	case basisCells:
		return p.GetHeatCapacityJPerMolK(), p.GetEntropyJPerMolK(), p.GetFreeEnergyKjPerMol(), p.GetInternalEnergyKjPerMol()
	case basisKg:
		return p.GetHeatCapacityJPerKgK(), p.GetEntropyJPerKgK(), p.GetFreeEnergyKjPerKg(), p.GetInternalEnergyKjPerKg()
	}
	return p.GetHeatCapacityJPerMolAtomsK(), p.GetEntropyJPerMolAtomsK(), p.GetFreeEnergyKjPerMolAtoms(), p.GetInternalEnergyKjPerMolAtoms()
}

// zeroPoint returns the zero-point energy in kJ per basis.
func (b thermalBasis) zeroPoint(r *modegridv1.ComputeThermalResponse) float64 {
	switch b {
	case basisCells:
		return r.GetZeroPointEnergyKjPerMol()
	case basisKg:
		return r.GetZeroPointEnergyKjPerKg()
	}
	return r.GetZeroPointEnergyKjPerMolAtoms()
}

// per is the basis as the denominator of a unit: "mol atoms", "mol cells",
// "kg".
func (b thermalBasis) per() string {
	switch b {
	case basisCells:
		return "mol cells"
	case basisKg:
		return "kg"
	}
	return "mol atoms"
}

// csvSuffix is the basis in CSV column names: "mol_atoms", "mol_cells",
// "kg".
func (b thermalBasis) csvSuffix() string {
	switch b {
	case basisCells:
		return "mol_cells"
	case basisKg:
		return "kg"
	}
	return "mol_atoms"
}

// csvColumns are the CSV names of Cv, S, F, U on this basis, e.g.
// heat_capacity_j_per_mol_atoms_k, free_energy_kj_per_kg.
func (b thermalBasis) csvColumns() []string {
	x := b.csvSuffix()
	return []string{"heat_capacity_j_per_" + x + "_k", "entropy_j_per_" + x + "_k", "free_energy_kj_per_" + x, "internal_energy_kj_per_" + x}
}

// entropyUnit and energyUnit are the units as printed: "J/(K·mol atoms)",
// "kJ/mol atoms"; "J/(kg·K)", "kJ/kg".
func (b thermalBasis) entropyUnit() string {
	if b == basisKg {
		return "J/(kg·K)"
	}
	return "J/(K·" + b.per() + ")"
}

func (b thermalBasis) energyUnit() string { return "kJ/" + b.per() }

// classicalLimit is the classical (Dulong–Petit) heat capacity on this
// basis: k_B per mode (Kittel, Introduction to Solid State Physics, ch. 5),
// so p·R per mole of atoms, p·sites·R per mole of cells and
// p·sites·k_B/m_cell per kilogram.
func (b thermalBasis) classicalLimit(r *modegridv1.ComputeThermalResponse, sites, pol int) float64 {
	switch b {
	case basisCells:
		return float64(pol*sites) * physics.GasConstantJPerMolK
	case basisKg:
		return float64(pol*sites) * physics.BoltzmannJPerK / (r.GetCellMassAmu() * physics.AtomicMassKg)
	}
	return float64(pol) * physics.GasConstantJPerMolK
}

// classicalLabel names the classical limit in a legend.
func (b thermalBasis) classicalLabel(sites, pol int) string {
	name := "classical limit"
	if pol == 3 {
		name = "Dulong–Petit"
	}
	switch b {
	case basisCells:
		return fmt.Sprintf("%s %dR × %d site%s", name, pol, sites, plural(sites))
	case basisKg:
		return fmt.Sprintf("%s %d·%d·kB / cell mass", name, pol, sites)
	}
	return fmt.Sprintf("%s %dR", name, pol)
}

// measuredColumn is the name of the heat-capacity column of a measured
// file (--measured) on this basis: Cv_J_per_molatom_K, Cv_J_per_molcell_K
// or Cv_J_per_kg_K.
func (b thermalBasis) measuredColumn() string {
	switch b {
	case basisCells:
		return "Cv_J_per_molcell_K"
	case basisKg:
		return "Cv_J_per_kg_K"
	}
	return "Cv_J_per_molatom_K"
}

// inMoleOfCells is the amount of this basis in one mole of cells: sites
// moles of atoms, one mole of cells, or the cells' molar mass in kg
// (cellMassAmu × M_u). An extensive value per b times it is the value per
// mole of cells.
func (b thermalBasis) inMoleOfCells(sites int, cellMassAmu float64) float64 {
	switch b {
	case basisCells:
		return 1
	case basisKg:
		return cellMassAmu * physics.MolarMassConstantKgPerMol
	}
	return float64(sites)
}

// convert turns a value per basis from into one per basis b, for a cell of
// sites sites and cellMassAmu amu.
func (b thermalBasis) convert(v float64, from thermalBasis, sites int, cellMassAmu float64) float64 {
	if b == from {
		return v
	}
	return v * from.inMoleOfCells(sites, cellMassAmu) / b.inMoleOfCells(sites, cellMassAmu)
}
