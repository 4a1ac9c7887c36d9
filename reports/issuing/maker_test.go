package issuing

import (
	"testing"

	"trimline/instruments"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// The maker printed on a certificate is the one the unit's port identified (the
// sequence's maker, recorded by the identify step), found by the role's kind
// whatever the station names it; a record without kinds is read by the name dut.
func TestMakerFromThePortByKind(t *testing.T) {
	bench := instruments.Identity{Maker: "Fictive Metrology", Model: "DCV-20", Serial: "1", Firmware: "1"}
	unit := instruments.Identity{Maker: "Fenwright Labs", Model: "OFX-10", Serial: "OFX-0001", Firmware: "OFX10-FW 1.0.4"}
	for _, c := range []struct {
		name string
		ins  []sequencer.InstrumentRef
		want string
	}{
		{"named roles with kinds", []sequencer.InstrumentRef{
			{Role: "input", Kind: sequencer.VoltageSource, Identity: bench},
			{Role: "card", Kind: sequencer.DUTPort, Identity: unit}}, "Fenwright Labs"},
		{"record without kinds", []sequencer.InstrumentRef{
			{Role: "source", Identity: bench}, {Role: "dut", Identity: unit}}, "Fenwright Labs"},
		{"port not identified", []sequencer.InstrumentRef{
			{Role: "input", Kind: sequencer.VoltageSource, Identity: bench},
			{Role: "card", Kind: sequencer.DUTPort, Identity: instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}}}, ""},
		{"a source is not the maker", []sequencer.InstrumentRef{
			{Role: "dut", Kind: sequencer.VoltageSource, Identity: bench}}, ""},
	} {
		got := certOptions(&sequencer.Record{Instruments: c.ins}, ledger.RunMeta{}).Maker
		if got != c.want {
			t.Errorf("%s: maker %q, want %q", c.name, got, c.want)
		}
	}
}
