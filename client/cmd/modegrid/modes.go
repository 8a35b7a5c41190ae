package main

import (
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"google.golang.org/protobuf/encoding/protojson"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func cmdModes(args []string, stdout, _ io.Writer) error {
	fs := flag.NewFlagSet("modes", flag.ContinueOnError)
	var c common
	c.register(fs)
	qs := fs.String("q", "", `q-points, fractional reciprocal: "a,b,c;a,b,c"`)
	if err := parse(fs, args); err != nil {
		return err
	}
	if err := c.check(); err != nil {
		return err
	}
	if c.model == "" {
		return usagef("--model is required")
	}
	if *qs == "" {
		return usagef("--q is required")
	}
	pts, err := parseQList(*qs)
	if err != nil {
		return usagef("--q: %v", err)
	}
	crystal, err := client.LoadModel(c.model)
	if err != nil {
		return err
	}
	cl, stop, err := connect(c.server)
	if err != nil {
		return err
	}
	defer stop()
	ctx, cancel := callContext()
	defer cancel()
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{
		Model:   &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: crystal}},
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}},
	})
	if err != nil {
		return err
	}
	return writeModes(stdout, c.format, resp)
}

// parseQList parses "a,b,c;a,b,c": up to three numbers per point, missing
// trailing components are 0.
func parseQList(s string) ([]*modegridv1.QPoint, error) {
	var out []*modegridv1.QPoint
	for i, part := range strings.Split(s, ";") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		fields := strings.Split(part, ",")
		if len(fields) > 3 {
			return nil, fmt.Errorf("point %d %q has %d components, at most 3", i+1, part, len(fields))
		}
		var v [3]float64
		for k, f := range fields {
			x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
			if err != nil {
				return nil, fmt.Errorf("point %d component %d: %q is not a number", i+1, k+1, f)
			}
			v[k] = x
		}
		out = append(out, &modegridv1.QPoint{Q1: v[0], Q2: v[1], Q3: v[2]})
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no q-points in %q", s)
	}
	return out, nil
}

func unitSuffix(u modegridv1.FrequencyUnit) string {
	switch u {
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV:
		return "mev"
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1:
		return "cm-1"
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_RAD_PER_S:
		return "rad_per_s"
	default:
		return "thz"
	}
}

func fmtFloat(x float64) string { return strconv.FormatFloat(x, 'g', 10, 64) }

func writeModes(w io.Writer, format string, resp *modegridv1.ComputeModesResponse) error {
	unit := unitSuffix(resp.GetUnit())
	switch format {
	case "json":
		b, err := protojson.MarshalOptions{Multiline: true}.Marshal(resp)
		if err != nil {
			return err
		}
		_, err = fmt.Fprintln(w, string(b))
		return err
	case "csv":
		fmt.Fprintf(w, "q1,q2,q3,branch,frequency_%s\n", unit)
		for _, p := range resp.GetPoints() {
			q := p.GetQ()
			for b, f := range p.GetFrequencies() {
				fmt.Fprintf(w, "%s,%s,%s,%d,%s\n", fmtFloat(q.GetQ1()), fmtFloat(q.GetQ2()), fmtFloat(q.GetQ3()), b+1, fmtFloat(f))
			}
		}
		return nil
	default:
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintf(tw, "q1\tq2\tq3\tbranch\tfrequency (%s)\t\n", unit)
		for _, p := range resp.GetPoints() {
			q := p.GetQ()
			for b, f := range p.GetFrequencies() {
				fmt.Fprintf(tw, "%.4f\t%.4f\t%.4f\t%d\t%.6f\t\n", q.GetQ1(), q.GetQ2(), q.GetQ3(), b+1, f)
			}
		}
		return tw.Flush()
	}
}
