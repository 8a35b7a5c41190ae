//go:build wip

package server

import (
	"context"
	"time"
	"github.com/materials-lab/modegrid/physics"
	"bufio"
	"fmt"
	"os"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func TestScratchDecode(t *testing.T) {
	f, _ := os.Open(os.Getenv("SEED"))
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<20)
	sc.Scan()
	sc.Scan()
	line := strings.TrimSuffix(strings.TrimPrefix(sc.Text(), "[]byte("), ")")
	s, err := strconv.Unquote(line)
	if err != nil {
		t.Fatal(err)
	}
	var m proto.Message
	switch os.Getenv("KIND") {
	case "check":
		m = &modegridv1.CheckModelRequest{}
	case "modes":
		m = &modegridv1.ComputeModesRequest{}
	case "disp":
		m = &modegridv1.ComputeDispersionRequest{}
	case "dos":
		m = &modegridv1.ComputeDosRequest{}
	case "thermal":
		m = &modegridv1.ComputeThermalRequest{}
	}
	fmt.Println(proto.Unmarshal([]byte(s), m))
	fmt.Println(protojson.Format(m))
	if r, ok := m.(interface{ GetModel() *modegridv1.ModelSource }); ok {
		fmt.Println("search cost", shellSearchCost(r.GetModel().GetCrystal()), "extreme", extremeModel(r.GetModel().GetCrystal()))
	}
}

func TestScratchHang(t *testing.T) {
	c := &physics.Crystal{Lattice: [][3]float64{{2.6364711279201225e+159, 0, 0}, {0, 3, 0}}, Polarizations: 2,
		Sites:  []physics.Site{{Label: "S", MassAmu: 30, Frac: []float64{0, 0}}},
		Shells: []physics.Shell{{FromLabel: "S", ToLabel: "S", Shell: 1, KLong: 1}, {FromLabel: "S", ToLabel: "S", Shell: 2, KLong: 0.5}}}
	t0 := time.Now()
	m, err := physics.Compile(c, physics.Options{})
	fmt.Println("compile", time.Since(t0), err)
	t0 = time.Now()
	fmt.Println("lattice", m.LatticeType(), time.Since(t0))
	t0 = time.Now()
	ops := m.Symmetry()
	fmt.Println("symmetry", len(ops), time.Since(t0))
	t0 = time.Now()
	lo, hi, st, err := m.Stability(context.Background(), 4)
	fmt.Println("stability", lo, hi, st, err, time.Since(t0))
}
