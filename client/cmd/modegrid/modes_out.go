package main

import (
	"fmt"
	"io"
	"strconv"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// modesExtras chooses the optional columns of `modes`: eigenvectors and
// group velocities. labels and pol describe the crystal's sites so that the
// eigenvector columns are named by site and axis.
type modesExtras struct {
	vectors, velocities bool
	labels              []string // site labels, in site order
	pol                 int      // polarizations p
}

func (x modesExtras) any() bool { return x.vectors || x.velocities }

var axisNames = [3]string{"x", "y", "z"}

// velocityColumns are the CSV names of the group velocity components.
var velocityColumns = []string{"v_x_km_s", "v_y_km_s", "v_z_km_s"}

// vectorColumns names the eigenvector components, site-major then axis:
// e_<site>_<axis>_re and e_<site>_<axis>_im, <site> the label (with the
// site index when labels repeat).
func (x modesExtras) vectorColumns() []string {
	index := make([]int, len(x.labels))
	for i := range index {
		index[i] = i
	}
	sites := siteColumns("e_", x.labels, index)
	var out []string
	for _, s := range sites {
		for a := 0; a < x.pol; a++ {
			out = append(out, s+"_"+axisNames[a]+"_re", s+"_"+axisNames[a]+"_im")
		}
	}
	return out
}

// writeModesExtras writes modes with eigenvectors and/or velocities, one
// row per q-point and branch, as CSV or a table.
func writeModesExtras(w io.Writer, format string, r *modegridv1.ComputeModesResponse, x modesExtras) error {
	unit := r.GetUnit()
	vcols := x.vectorColumns()
	n := len(vcols) / 2 // components per mode
	csv := format == "csv"
	head := []string{"q1", "q2", "q3", "branch", "frequency_" + unitName(unit)}
	if !csv {
		head[4] = fmt.Sprintf("ν (%s)", unitLabel(unit))
	}
	if x.velocities {
		if csv {
			head = append(head, velocityColumns...)
		} else {
			head = append(head, "vx (km/s)", "vy (km/s)", "vz (km/s)")
		}
	}
	if x.vectors {
		for i := 0; i < n; i++ {
			if csv {
				head = append(head, vcols[2*i], vcols[2*i+1])
			} else {
				// "e_A_x_re" → "e_A_x": one complex number per cell
				head = append(head, vcols[2*i][:len(vcols[2*i])-3])
			}
		}
	}
	var rows [][]string
	for _, p := range r.GetPoints() {
		q := p.GetQ()
		freqs := p.GetFrequencies()
		vel, vec := p.GetGroupVelocitiesKmS(), p.GetEigenvectors()
		if x.velocities && len(vel) != 3*len(freqs) || x.vectors && len(vec) != 2*n*len(freqs) {
			return fmt.Errorf("the server sent %d velocity and %d eigenvector numbers for %d modes of %d components", len(vel), len(vec), len(freqs), n)
		}
		for b, f := range freqs {
			fmtNum := f4
			if csv {
				fmtNum = num
			}
			row := []string{fmtNum(q.GetQ1()), fmtNum(q.GetQ2()), fmtNum(q.GetQ3()), strconv.Itoa(b + 1), fmtNum(f)}
			if x.velocities {
				for a := 0; a < 3; a++ {
					row = append(row, fmtNum(vel[3*b+a]))
				}
			}
			if x.vectors {
				for c := 0; c < n; c++ {
					re, im := vec[2*(b*n+c)], vec[2*(b*n+c)+1]
					if csv {
						row = append(row, num(re), num(im))
					} else {
						row = append(row, complexCell(re, im))
					}
				}
			}
			rows = append(rows, row)
		}
	}
	if csv {
		c := newCSV(w)
		c.row(head...)
		for _, r := range rows {
			c.row(r...)
		}
		return c.flush()
	}
	t := newTable(w)
	t.row(head...)
	for _, r := range rows {
		t.row(r...)
	}
	return t.flush()
}

// complexCell prints re + im·i with four decimals, e.g. "0.7071-0.1000i".
func complexCell(re, im float64) string {
	s := f4(im)
	if s[0] != '-' {
		s = "+" + s
	}
	return f4(re) + s + "i"
}
