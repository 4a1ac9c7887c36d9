package instruments_test

import (
	"testing"

	"trimline/instruments"
	"trimline/instruments/scpi"
)

// A simulated instrument is told by its address (sim://) or, reached through a
// real transport, by the maker field of its *IDN? reply; a real instrument by
// neither. The reply is the served simulator's as a client parses it.
func TestSimulatedByAddressOrIdentity(t *testing.T) {
	served, err := scpi.ParseIDN("Trimline Sim,DV-65,DV000003,1.0")
	if err != nil {
		t.Fatal(err)
	}
	real := instruments.Identity{Maker: "Quillmere Instruments", Model: "DV-65", Serial: "S1", Firmware: "2.1"}
	for _, c := range []struct {
		address string
		id      instruments.Identity
		want    bool
	}{
		{"sim://meter", instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}, true},
		{"SIM://meter", real, true},
		{"tcp://127.0.0.1:5025", served, true},
		{"serial:///dev/pts/3?baud=115200", served, true},
		{"tcp://10.0.0.5:5025", real, false},
		{"usbtmc:///dev/usbtmc0", instruments.Identity{Maker: "0"}, false},
		{"tcp://simhost:5025", real, false}, // a host name is not a scheme
	} {
		if got := instruments.Simulated(c.address, c.id); got != c.want {
			t.Errorf("Simulated(%q, %q) = %v, want %v", c.address, c.id, got, c.want)
		}
	}
}
