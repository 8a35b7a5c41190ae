package main

import (
	"fmt"
	"io"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const checkSummary = `Validates a model and summarises it: its hash, dimensionality, sites,
modes per cell, interactions and bonds per shell, the acoustic sum-rule
violation of explicit blocks, symmetry operations, and stability on a coarse
grid. An invalid model exits 3 with every bad field listed.`

func cmdCheck(args []string, e *env) error {
	fs := newFlagSet("check")
	var m modelFlag
	var conn connFlags
	var out outFlags
	m.register(fs)
	conn.register(fs)
	out.register(fs, false)
	sumRule := fs.Bool("sum-rule", false, "impose the acoustic sum rule on explicit blocks")
	if err := parse(fs, args, e.stderr, checkSummary); err != nil {
		return err
	}
	if err := out.check(fs); err != nil {
		return err
	}
	if err := conn.check(); err != nil {
		return err
	}
	crystal, err := m.load()
	if err != nil {
		return err
	}
	cl, stop, err := connect(conn.server, conn.options()...)
	if err != nil {
		return err
	}
	defer stop()
	ctx, cancel := callContext()
	defer cancel()
	src := client.Inline(crystal)
	src.EnforceSumRule = *sumRule
	done := e.prog.running("checking the model")
	resp, err := cl.Check(ctx, &modegridv1.CheckModelRequest{Model: src})
	done()
	if err != nil {
		return err
	}
	// An invalid model's problems go to stderr; a table on stdout would only
	// repeat them, CSV and JSON are written for programs.
	if resp.GetValid() || out.format != "table" {
		if err := out.write(e.stdout, func(w io.Writer) error { return writeCheck(w, out.format, crystal.GetName(), resp) }); err != nil {
			return err
		}
	}
	if !resp.GetValid() {
		ie := &invalidError{msg: fmt.Sprintf("model %s is invalid (%d problem%s)", m.path, len(resp.GetViolations()), plural(len(resp.GetViolations())))}
		for _, v := range resp.GetViolations() {
			ie.violations = append(ie.violations, v.GetField()+": "+v.GetDescription())
		}
		return ie
	}
	return nil
}
