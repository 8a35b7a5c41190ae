package main

import (
	"fmt"
	"io"
	"text/tabwriter"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const uploadSummary = `Sends a model to a running server (--server) through its upload stream,
whatever its size, and prints the model hash under which the server holds
it: other programs can then name the model by that hash
(ModelSource.model_hash) instead of sending it. Every other command uploads
a model too large for one message by itself; this one is for sending a
model ahead of the work. A model the server evicts later is NOT_FOUND by
hash: upload it again.`

func cmdUpload(args []string, e *env) error {
	c := newModelCommand("upload", false)
	if err := c.parse(args, e, uploadSummary); err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	if c.conn.server == "" {
		e.note("no --server: the model goes to this command's embedded server, which ends with it; the hash is printed all the same")
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	done := e.prog.running("uploading the model")
	resp, err := cl.UploadModel(ctx, c.source(crystal))
	done()
	if err != nil {
		return err
	}
	return c.out.write(e.stdout, func(w io.Writer) error { return writeUpload(w, c.out.format, crystal.GetName(), resp) })
}

// writeUpload writes the answer of an upload: the hash first, then the
// sizes.
func writeUpload(w io.Writer, format, name string, r *modegridv1.UploadModelResponse) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	rows := []checkRow{
		{"name", "model", name},
		{"model_hash", "model hash", r.GetModelHash()},
		{"received_bytes", "bytes sent", fmt.Sprint(r.GetReceivedBytes())},
		{"sites", "sites", fmt.Sprint(r.GetSites())},
		{"interactions", "interactions", fmt.Sprint(r.GetInteractions())},
		{"stored_bytes", "held in the server's cache, bytes", fmt.Sprint(r.GetStoredBytes())},
	}
	if f := r.GetSupercellFold(); f != nil {
		rows = append(rows, checkRow{"supercell_atoms_mapped", "supercell atoms mapped", fmt.Sprint(f.GetAtomsMapped())})
	}
	if format == "csv" {
		c := newCSV(w)
		c.row("property", "value")
		for _, r := range rows {
			c.row(r.key, r.value)
		}
		return c.flush()
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	for _, r := range rows {
		fmt.Fprintf(tw, "%s\t%s\n", r.human, r.value)
	}
	return tw.Flush()
}
