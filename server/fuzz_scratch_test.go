//go:build wip

package server

import (
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
}
