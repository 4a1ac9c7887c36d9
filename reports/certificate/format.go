package certificate

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"trimline/limits"
	"trimline/sequencer"
	"trimline/sequencer/units"
)

// timeFormat is the one way the certificate writes a time.
const timeFormat = "2006-01-02 15:04:05 UTC"

func fmtTime(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.UTC().Format(timeFormat)
}

// dispUnit turns a unit as written in a limit file into its printed form.
func dispUnit(u string) string {
	u = strings.TrimSpace(u)
	switch u {
	case "ohm", "Ohm", "ohms":
		return "Ω"
	case "degC":
		return "°C"
	case "codes", "LSB":
		return "code"
	}
	for _, suffix := range []string{"ohm", "Ohm"} {
		if p, ok := strings.CutSuffix(u, suffix); ok && len(p) == 1 {
			u = p + "Ω"
		}
	}
	if len(u) >= 2 && u[0] == 'u' && strings.ContainsAny(u[1:2], "VAsΩ") {
		u = "µ" + u[1:]
	}
	return u
}

// isCount reports whether a unit counts codes, which print as integers.
func isCount(u string) bool {
	switch strings.TrimSpace(u) {
	case "code", "codes", "LSB", "count":
		return true
	}
	return false
}

// fmtNum writes v with four significant digits in fixed notation, or in
// exponent notation when it is very large or very small.
func fmtNum(v float64) string {
	switch {
	case math.IsNaN(v):
		return "NaN"
	case math.IsInf(v, 1):
		return "+Inf"
	case math.IsInf(v, -1):
		return "-Inf"
	case v == 0:
		return "0"
	}
	a := math.Abs(v)
	if a >= 1e6 || a < 1e-3 {
		return strconv.FormatFloat(v, 'e', 3, 64)
	}
	dec := 3 - int(math.Floor(math.Log10(a)))
	dec = max(0, min(dec, 6))
	return strconv.FormatFloat(v, 'f', dec, 64)
}

// fmtValue writes a limit value (already in the limit's unit) with its unit.
func fmtValue(v float64, unit string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "not valid"
	}
	if isCount(unit) {
		return strconv.FormatFloat(math.Round(v), 'f', 0, 64)
	}
	u := dispUnit(unit)
	if u == "" {
		return fmtNum(v)
	}
	return fmtNum(v) + " " + u
}

// outcomeValues lists an outcome's values, one "name = value" line each when it
// uses more than one result. The order is the order of Uses, then any other keys
// sorted, so that map order never reaches the page.
func outcomeValues(o limits.Outcome) []string {
	keys := make([]string, 0, len(o.Values))
	seen := map[string]bool{}
	for _, k := range o.Uses {
		if _, ok := o.Values[k]; ok && !seen[k] {
			keys = append(keys, k)
			seen[k] = true
		}
	}
	var rest []string
	for k := range o.Values {
		if !seen[k] {
			rest = append(rest, k)
		}
	}
	sort.Strings(rest)
	keys = append(keys, rest...)
	if len(keys) == 0 {
		return []string{"not measured"}
	}
	if len(keys) == 1 {
		return []string{fmtValue(o.Values[keys[0]], o.Unit)}
	}
	out := make([]string, len(keys))
	for i, k := range keys {
		out[i] = k + " = " + fmtValue(o.Values[k], o.Unit)
	}
	return out
}

// fmtResult writes a result's value in its dimension: volts with an SI prefix,
// ratios in ppm (or % when large), codes as integers.
func fmtResult(r sequencer.Result) string {
	if !r.Valid || math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
		return "not valid"
	}
	switch r.Unit {
	case "V":
		return units.Format(r.Value, "V", 4)
	case "ratio":
		if math.Abs(r.Value) >= 0.01 {
			return strconv.FormatFloat(r.Value*100, 'f', 3, 64) + " %"
		}
		return units.Format(r.Value*1e6, "ppm", 4)
	case "code":
		return strconv.FormatFloat(math.Round(r.Value), 'f', 0, 64)
	}
	return strings.TrimSpace(fmtNum(r.Value) + " " + r.Unit)
}

// fmtVolts writes a voltage with an SI prefix, or "—" when it is not a number.
func fmtVolts(v float64, digits int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "—"
	}
	return units.Format(v, "V", digits)
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

func plural(n int, one, many string) string {
	if n == 1 {
		return fmt.Sprintf("%d %s", n, one)
	}
	return fmt.Sprintf("%d %s", n, many)
}
