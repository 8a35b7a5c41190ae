package main

import (
	"flag"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// cmdDemo runs the main job on the built-in example crystals through an
// embedded (or given) server and prints a summary.
func cmdDemo(args []string, stdout, _ io.Writer) error {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	server := fs.String("server", "", "modegridd address (default: embedded server)")
	if err := parse(fs, args); err != nil {
		return err
	}
	cl, stop, err := connect(*server)
	if err != nil {
		return err
	}
	defer stop()
	ctx, cancel := callContext()
	defer cancel()
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "crystal\tmodes/cell\tq\tfrequencies (THz)")
	for _, name := range examples.Names() {
		c, err := examples.Load(name)
		if err != nil {
			return err
		}
		// The zone boundary along b1 of each crystal.
		q := &modegridv1.QPoint{Q1: 0.5}
		resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{
			Model:   &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: c}},
			Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{q}}}},
		})
		if err != nil {
			return fmt.Errorf("%s: %w", name, err)
		}
		f := resp.GetPoints()[0].GetFrequencies()
		fmt.Fprintf(tw, "%s\t%d\t(0.5,0,0)\t%s\n", name, len(f), joinFloats(f))
	}
	return tw.Flush()
}

func joinFloats(f []float64) string {
	s := ""
	for i, x := range f {
		if i > 0 {
			s += " "
		}
		s += fmt.Sprintf("%.4f", x)
	}
	return s
}
