package main

import (
	"fmt"
	"io"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const checkSummary = `Validates a model and summarises it: its hash, dimensionality, sites,
modes per cell, interactions and bonds per shell, the acoustic sum-rule
violation of explicit blocks, for a model given as a supercell force-constant
set what its fold corrected (each violation before and after), symmetry
operations, and stability on a coarse grid. An invalid model exits 3 with every bad field listed.`

func cmdCheck(args []string, e *env) error {
	c := newModelCommand("check", false)
	if err := c.parse(args, e, checkSummary); err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	src := c.source(crystal)
	done := e.prog.running("checking the model")
	resp, err := cl.Check(ctx, &modegridv1.CheckModelRequest{Model: src})
	done()
	if err != nil {
		return err
	}
	// An invalid model's problems go to stderr; a table on stdout would only
	// repeat them, CSV and JSON are written for programs.
	if resp.GetValid() || c.out.format != "table" {
		if err := c.out.write(e.stdout, func(w io.Writer) error { return writeCheck(w, c.out.format, crystal.GetName(), resp) }); err != nil {
			return err
		}
	}
	if !resp.GetValid() {
		ie := &invalidError{msg: fmt.Sprintf("model %s is invalid (%d problem%s)", c.m.path, len(resp.GetViolations()), plural(len(resp.GetViolations())))}
		for _, v := range resp.GetViolations() {
			ie.violations = append(ie.violations, v.GetField()+": "+v.GetDescription())
		}
		return ie
	}
	return nil
}
