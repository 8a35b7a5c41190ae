package main

import (
	"path/filepath"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// heatModels are the invented fcc crystal at five volumes (testdata/heat:
// the example scaled by −2…+2 % in length, its springs by V^(−3)) and
// their invented static energies (a Birch–Murnaghan curve, eV per cell).
var heatModels = func() string {
	var out string
	for i := 0; i < 5; i++ {
		if i > 0 {
			out += ","
		}
		out += filepath.Join("testdata", "heat", "fcc-v"+string(rune('0'+i))+".json")
	}
	return out
}()

// heatOtherVolumes are the four volumes besides the example's own.
var heatOtherVolumes = filepath.Join("testdata", "heat", "fcc-v0.json") + "," + filepath.Join("testdata", "heat", "fcc-v1.json") + "," +
	filepath.Join("testdata", "heat", "fcc-v3.json") + "," + filepath.Join("testdata", "heat", "fcc-v4.json")

const heatEnergies = "-3.9690819244,-3.9925417526,-4,-3.9930460028,-3.9731219409"

// The heat subcommands' golden cases, appended to goldenCases, and their
// JSON responses for the JSON tests.
func init() {
	responseOf["gruneisen"] = (&modegridv1.ComputeGruneisenResponse{}).ProtoReflect().Descriptor()
	responseOf["qha"] = (&modegridv1.ComputeQuasiHarmonicResponse{}).ProtoReflect().Descriptor()
	responseOf["conductivity"] = (&modegridv1.ComputeConductivityResponse{}).ProtoReflect().Descriptor()
	goldenCases = append(goldenCases, []struct {
		name string
		args []string
	}{
		{"gruneisen-fcc-path-table", []string{"gruneisen", "--models", heatModels, "--path", "G-X", "--points", "3"}},
		{"gruneisen-fcc-q-csv", []string{"gruneisen", "--models", heatModels, "--q", "0.1,0.2,0.3", "--format", "csv"}},
		{"gruneisen-fcc-temps-table", []string{"gruneisen", "--models", heatModels, "--grid", "4", "--temps", "0,100,300"}},
		{"qha-fcc-table", []string{"qha", "--models", heatModels, "--energies", heatEnergies, "--grid", "6", "--temps", "0,100,300,600"}},
		{"qha-fcc-cells-bm-csv", []string{"qha", "--models", heatModels, "--energies", heatEnergies, "--grid", "6", "--temps", "0,300", "--eos", "birch-murnaghan", "--basis", "cells", "--format", "csv"}},
		{"qha-fcc-json", []string{"qha", "--models", heatModels, "--energies", heatEnergies, "--grid", "4", "--temps", "300", "--format", "json"}},
		{"conductivity-fcc-table", []string{"conductivity", "-m", example("fcc"), "--grid", "6", "--temps", "50,300", "--samples", "film:100nm grain:1um bulk", "--g2", "2e-4", "--gruneisen", "1.5"}},
		{"conductivity-fcc-csv", []string{"conductivity", "-m", example("fcc"), "--grid", "6", "--temps", "50,300", "--samples", "wire:50nm", "--gruneisen-models", heatOtherVolumes, "--power", "1e9,2", "--format", "csv"}},
		{"gruneisen-fcc-json", []string{"gruneisen", "--models", heatModels, "--q", "0.25,0,0.25", "--format", "json"}},
		{"conductivity-fcc-json", []string{"conductivity", "-m", example("fcc"), "--grid", "4", "--temps", "300", "--samples", "film:1um", "--gruneisen", "1.5", "--cumulative", "300", "--bins", "3", "--format", "json"}},
		{"conductivity-fcc-cumulative-csv", []string{"conductivity", "-m", example("fcc"), "--grid", "6", "--samples", "grain:1um", "--gruneisen", "1.5", "--cumulative", "300", "--bins", "5", "--format", "csv"}},
	}...)
}
