package sequencer

import (
	"fmt"
	"maps"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
)

// Served is what a served bench asks of the station file that reaches it, per role:
// the driver settings and templates its instruments need (the fixture's load_unit,
// the source's output watchdog).
type Served struct {
	Settings, Templates map[string]map[string]string
}

// Rewired writes a station file equal to st but with each instrument at the
// address addrs gives its role, without the simulator's settings (the bench being
// served holds them), and with the settings and templates sv gives each role. The
// output folder is written absolute, so the copy writes where st does wherever the
// copy lives.
func (st *Station) Rewired(addrs map[string]string, sv Served) []byte {
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
		for _, block := range []struct {
			key string
			m   map[string]string
		}{{"settings", sv.Settings[r]}, {"templates", sv.Templates[r]}} {
			if len(block.m) == 0 {
				continue
			}
			fmt.Fprintf(&b, "    %s:\n", block.key)
			for _, k := range slices.Sorted(maps.Keys(block.m)) {
				fmt.Fprintf(&b, "      %s: %s\n", k, q(block.m[k]))
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
