package sequencer

import (
	"fmt"
	"maps"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
)

// Rewired writes a station file equal to st but with each instrument at the
// address addrs gives its role, without the simulator's settings (the bench being
// served holds them), and with dutTemplates as the DUT's templates (e.g. the served
// fixture's load_unit). The output folder is written absolute, so the copy writes
// where st does wherever the copy lives.
func (st *Station) Rewired(addrs map[string]string, dutTemplates map[string]string) []byte {
	var b strings.Builder
	q := strconv.Quote
	fmt.Fprintf(&b, "# Station %s, served over the wire by `trimline bench` / `trimline demo --transport`.\n", st.ID)
	fmt.Fprintf(&b, "station:\n  id: %s\n  name: %s\n  certificate_prefix: %s\n", q(st.ID), q(st.Name+" (served simulator)"), q(st.CertificatePrefix))
	b.WriteString("instruments:\n")
	for _, r := range Roles {
		in, ok := st.Instruments[r]
		if !ok {
			continue
		}
		fmt.Fprintf(&b, "  %s:\n    address: %s\n    asset: %s\n", r, q(addrs[r]), q(in.Asset))
		if !in.CalDue.IsZero() {
			fmt.Fprintf(&b, "    cal_due: %s\n", in.CalDue.Format("2006-01-02"))
		}
		if a := in.Accuracy; a != (Accuracy{}) {
			fmt.Fprintf(&b, "    accuracy:\n      of_reading: %.9g ppm\n      of_range: %.9g ppm\n      range: %.9g V\n", a.OfReading*1e6, a.OfRange*1e6, a.Range)
			if a.Resolution > 0 {
				fmt.Fprintf(&b, "      resolution: %.9g V\n", a.Resolution)
			}
		}
		if r == "dut" && len(dutTemplates) > 0 {
			b.WriteString("    templates:\n")
			for _, k := range slices.Sorted(maps.Keys(dutTemplates)) {
				fmt.Fprintf(&b, "      %s: %s\n", k, q(dutTemplates[k]))
			}
		}
	}
	fmt.Fprintf(&b, "safety:\n  source_rating: {voltage: %.9g V, current: %.9g A}\n", st.SourceRating.Volts, st.SourceRating.Amps)
	fmt.Fprintf(&b, "  max_source_voltage: %g V\n  max_source_current: %g A\n", st.MaxSourceVolts, st.MaxSourceAmps)
	if st.Interlock != nil {
		fmt.Fprintf(&b, "interlock:\n  role: %s\n  query: %s\n  closed: %s\n", st.Interlock.Role, q(st.Interlock.Query), q(st.Interlock.Closed))
	}
	if st.OutputFolder != "" {
		// The folder was resolved against the original file; keep it absolute so
		// the copy writes to the same place wherever it lives.
		if abs, err := filepath.Abs(st.OutputFolder); err == nil {
			fmt.Fprintf(&b, "output:\n  folder: %s\n", q(filepath.ToSlash(abs)))
		}
	}
	return []byte(b.String())
}
