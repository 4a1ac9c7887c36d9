package whatif

import (
	"math"
	"strconv"
	"strings"

	"trimline/instruments/units"
)

// displayUnit returns the SI value of one unit u and its printed form; an unknown
// unit is shown as SI (scale 1) without a name.
func displayUnit(u string) (float64, string) {
	u = strings.TrimSpace(u)
	if u == "" {
		return 1, ""
	}
	q, err := units.Parse("1" + u)
	if err != nil || !(q.Value > 0) || math.IsInf(q.Value, 0) {
		return 1, ""
	}
	if len(u) >= 2 && u[0] == 'u' {
		u = "µ" + u[1:]
	}
	return q.Value, u
}

func sp(u string) string {
	if u == "" {
		return ""
	}
	return " " + u
}

func orDash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "—"
	}
	return s
}

// pct writes a fraction as a percentage with two decimals.
func pct(f float64) string { return strconv.FormatFloat(f*100, 'f', 2, 64) + " %" }

// signed writes a change in percentage points with a sign.
func signed(v float64) string {
	s := strconv.FormatFloat(math.Abs(v), 'f', 2, 64)
	switch {
	case s == "0.00":
		return "±0.00"
	case v < 0:
		return "−" + s
	}
	return "+" + s
}

// num writes v with up to 6 significant digits and a real minus sign.
func num(v float64) string { return units.FormatSig(v, 6) }

func near(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}
