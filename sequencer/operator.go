package sequencer

// Plain words for the operator: what a verdict means for the unit in their hand
// and, for a station fault, what failed and what to check. The metrologist's
// statement (limits.Decision.Statement, the record's Reasons) stays where a
// metrologist reads it: on the certificate and in the record.

import (
	"fmt"
	"regexp"
	"slices"
	"strings"

	"trimline/instruments/units"
	"trimline/limits"
)

// OperatorView is a run's outcome as the operator at the station reads it.
type OperatorView struct {
	Headline string   // "PASS", "FAIL", "REVIEW", "STATION FAULT", "STOPPED"
	Reasons  []string // one plain sentence per failed or held limit, worst first: "offset after trim is −12.4 mV, limit ±0.8 mV"
	Action   string   // what to do with the unit: "pack it", "send to rework", "retest it (attempt 2 of 3)", …
}

// Headlines of an OperatorView.
const (
	HeadlinePass    = "PASS"
	HeadlineFail    = "FAIL"
	HeadlineReview  = "REVIEW"
	HeadlineFault   = "STATION FAULT"
	HeadlineStopped = "STOPPED"
)

// Actions of an OperatorView (a retest's carries its attempt count; a note of
// the run, such as a chamber still hot, comes before any of them).
const (
	ActionPack     = "pack it"
	ActionRework   = "send to rework"
	ActionShelf    = "put it on the review shelf"
	ActionRetest   = "retest it"
	ActionAgain    = "test it again"
	ActionFixFault = "fix what the station fault says, clear it, then test this unit again"
	ActionEngineer = "call the test engineer; test this unit again once the station is fixed"
)

// ForOperator says what rec means for the operator: the verdict as a headline,
// each limit that failed or held the unit in one plain sentence (worst first:
// failed, then failed within the measurement's uncertainty, then not judged,
// then held for review; as-found limits and what stopped the run before the
// rest, as the record orders its reasons), and what to do with the unit.
//
// Values are stated as the certificate states them: in the limit's unit, to
// the decimal place of their stated expanded uncertainty (limits.Decision.
// ValueText, JCGM 100:2008 §7.2.6), with the tolerance as the limit file writes
// it ("limit ±800 µV", "limit ≤ 0.01 %", "limit −0.2 … +0.8 mV"); an
// expression limit is told by its description. The decision rule's words (zones,
// guard bands) are left to the statement.
//
// attempt is the run's number among the serial's measured runs (1 for a first
// test; ≤ 0 when not known, read as 1) and maxAttempts the sequence's
// retest.max_attempts (0 = no limit). A FAIL is offered a retest only when every
// failed limit failed within the measurement's uncertainty (ILAC-G8:09/2019
// §4.2.3: the true value may lie inside the tolerance, so a second measurement
// can decide otherwise) and attempts remain; a unit clearly outside a limit,
// or whose trim ran out of range, goes to rework.
func ForOperator(rec *Record, attempt, maxAttempts int) OperatorView {
	if rec == nil {
		return OperatorView{}
	}
	attempt = max(attempt, 1)
	var v OperatorView
	lines := operatorLines(rec)
	for _, l := range lines {
		v.Reasons = append(v.Reasons, l.text)
	}
	switch rec.Verdict {
	case Pass:
		v.Headline, v.Action = HeadlinePass, ActionPack
	case Review:
		v.Headline, v.Action = HeadlineReview, ActionShelf
	case Fail:
		v.Headline, v.Action = HeadlineFail, ActionRework
		retestable := len(lines) > 0
		for _, l := range lines {
			if l.rank != rankCloseFail && l.rank != rankHeld {
				retestable = false
			}
		}
		switch {
		case !retestable, rec.Disposition != nil: // a reviewer's rejection is final
		case maxAttempts <= 0:
			v.Action = fmt.Sprintf("%s (attempt %d)", ActionRetest, attempt+1)
		case attempt < maxAttempts:
			v.Action = fmt.Sprintf("%s (attempt %d of %d)", ActionRetest, attempt+1, maxAttempts)
		default:
			v.Action = fmt.Sprintf("%s (all %d attempts used)", ActionRework, maxAttempts)
		}
	case Fault:
		v.Headline, v.Action = HeadlineFault, ActionEngineer
		if classifyFault(rec).fixable {
			v.Action = ActionFixFault
		}
	case Aborted:
		v.Headline, v.Action = HeadlineStopped, ActionAgain
	default:
		v.Headline = string(rec.Verdict)
	}
	if d := rec.Disposition; d != nil {
		word := "accepted"
		if d.Decision == DecisionReject {
			word = "rejected"
		}
		v.Reasons = append([]string{fmt.Sprintf("%s on review by %s: %s", word, d.Reviewer, d.Reason)}, v.Reasons...)
	}
	// What the operator must know before touching the unit comes first.
	if len(rec.Notes) > 0 && v.Action != "" {
		v.Action = strings.Join(rec.Notes, "; ") + "; then " + v.Action
	}
	return v
}

// How bad one operator line is, worst first.
const (
	rankFail      = iota // clearly outside a limit, or the run could not go on (a saturated trim)
	rankCloseFail        // outside, but within the measurement's uncertainty of the limit
	rankUnjudged         // a result the limit needs was not measured
	rankHeld             // inside, but too near the limit to pass: held for review
)

type operatorLine struct {
	text    string
	rank    int
	asFound bool
	order   int
}

// operatorLines are rec's plain sentences, worst first.
func operatorLines(rec *Record) []operatorLine {
	var out []operatorLine
	for _, o := range rec.Outcomes {
		if o.Pass {
			continue
		}
		text, rank := outcomeSentence(rec, o)
		out = append(out, operatorLine{text: text, rank: rank, asFound: outcomeAsFound(rec, o), order: len(out)})
	}
	// What the engine itself failed the unit for (a saturated trim, a
	// read-back that did not match): the record's reasons that no limit gave.
	for _, r := range rec.Reasons {
		if !strings.HasPrefix(r, `limit "`) {
			out = append(out, operatorLine{text: r, rank: rankFail, order: len(out)})
		}
	}
	slices.SortStableFunc(out, func(a, b operatorLine) int {
		if a.rank != b.rank {
			return a.rank - b.rank
		}
		if a.asFound != b.asFound {
			if a.asFound {
				return -1
			}
			return 1
		}
		return a.order - b.order
	})
	return out
}

// outcomeAsFound reports whether o judges a result of the unit as found: an
// untrimmed value far out names an assembly fault, the real cause.
func outcomeAsFound(rec *Record, o limits.Outcome) bool {
	for _, r := range rec.Results {
		if slices.Contains(o.Uses, r.Name) && (o.Channel == "" || r.Channel == o.Channel) && r.StageOf() == AsFound {
			return true
		}
	}
	return false
}

// outcomeSentence is one failed or held limit in plain words, and how bad it is.
func outcomeSentence(rec *Record, o limits.Outcome) (string, int) {
	name := o.Name
	if o.Channel != "" {
		name += " (channel " + o.Channel + ")"
	}
	unit := units.Display(strings.TrimSpace(o.Unit))
	withUnit := func(s string) string {
		if unit == "" {
			return s
		}
		return s + " " + unit
	}
	// A result the limit needs has no valid value: say why, from the result.
	for _, n := range o.Uses {
		if _, ok := o.Values[n]; ok {
			continue
		}
		why := "not measured"
		for _, r := range rec.Results {
			if r.Name == n && (o.Channel == "" || r.Channel == o.Channel) && r.Note != "" {
				why = r.Note
				break
			}
		}
		if strings.HasPrefix(why, "not measured") {
			return name + " was " + why, rankUnjudged
		}
		return name + " has no valid value: " + why, rankUnjudged
	}
	if d := o.Decision; d != nil {
		value := d.ValueText()
		if isCodeUnit(o.Unit) && d.Value == float64(int64(d.Value)) {
			value = units.FormatSig(d.Value, 15)
		}
		s := fmt.Sprintf("%s is %s, limit %s", name, withUnit(value), withUnit(toleranceText(d.Lower, d.Upper)))
		if v, tol, u, ok := operatorQuantity(d.Value, d.U, o.Unit, d.Lower, d.Upper); ok {
			s = fmt.Sprintf("%s is %s %s, limit %s %s", name, v, u, tol, u)
		}
		switch d.Zone {
		case limits.ZoneConditionalPass:
			return s + ": inside, but too near the limit to be sure", rankHeld
		case limits.ZoneConditionalFail:
			return s, rankCloseFail
		}
		return s, rankFail
	}
	// An expression limit: its description says what it asks.
	var vals []string
	for _, n := range o.Uses {
		vals = append(vals, n+" = "+withUnit(units.FormatSig(o.Values[n], 6)))
	}
	s := name + " not met"
	if d := strings.TrimSpace(o.Description); d != "" {
		s += ": " + strings.TrimSuffix(d, ".")
	}
	if len(vals) > 0 {
		s += " (" + strings.Join(vals, ", ") + ")"
	}
	return s, rankFail
}

// toleranceText is a tolerance as the operator reads it, without its unit:
// "±800", "≤ 0.01", "≥ 4.5", "−0.2 … +0.8", "100 … 3995".
func toleranceText(lower, upper *float64) string {
	num := func(v float64) string { return units.FormatSig(v, 9) }
	switch {
	case lower != nil && upper != nil:
		lo, hi := *lower, *upper
		switch {
		case lo == -hi && hi > 0:
			return "±" + num(hi)
		case lo < 0 && hi > 0:
			return num(lo) + " … +" + num(hi)
		}
		return num(lo) + " … " + num(hi)
	case upper != nil:
		return "≤ " + num(*upper)
	case lower != nil:
		return "≥ " + num(*lower)
	}
	return "none"
}

func isCodeUnit(u string) bool {
	switch strings.TrimSpace(u) {
	case "code", "codes", "LSB", "count":
		return true
	}
	return false
}

// FaultText is a station fault in plain words: What failed ("the meter
// (DMM-0042 at tcp://127.0.0.1:5025) stopped answering"), what it Said (an
// error-queue entry, or what went wrong talking to it), and what to Check,
// written to follow "check": "its cable and power; that no one else is
// connected to it".
type FaultText struct{ What, Said, Check string }

// ExplainFault says what stopped a FAULT (or ABORTED) run, for the operator:
// from rec.FaultDetail when the engine knew which instrument failed, else from
// the fault message, naming the instrument by its role, asset tag and address
// from rec.Instruments. The zero FaultText for any other verdict.
func ExplainFault(rec *Record) FaultText {
	if rec == nil {
		return FaultText{}
	}
	switch rec.Verdict {
	case Aborted:
		return FaultText{What: "the run was stopped before the unit was finished (no certificate)", Said: rec.Fault,
			Check: "nothing: the source was switched off; test the unit again when ready"}
	case Fault:
	default:
		return FaultText{}
	}
	c := classifyFault(rec)
	return FaultText{What: c.what, Said: c.said, Check: c.check}
}

// faultClass is a station fault sorted into what the operator can do about it.
type faultClass struct {
	what, said, check string
	fixable           bool // the operator can fix it (a cable, a lid) and clear the fault
}

// instrumentError finds an error-queue entry in a fault message: -221, "Settings conflict".
var instrumentError = regexp.MustCompile(`instrument error (-?\d+, "[^"]*")`)

// classifyFault sorts rec's fault by the words its message uses (the engine's
// and the transports' own: "timeout", "link down", "malformed reply",
// "instrument error", "overload", "read back", "calibration expired",
// "interlock open", "safety cap").
func classifyFault(rec *Record) faultClass {
	text := rec.Fault
	said := rec.Fault
	if d := rec.FaultDetail; d != nil && d.Said != "" {
		text = d.Said + " " + rec.Fault
		said = d.Said
	} else if m := instrumentError.FindStringSubmatch(rec.Fault); m != nil {
		said = m[1]
	}
	lower := strings.ToLower(text)
	has := func(words ...string) bool {
		for _, w := range words {
			if strings.Contains(lower, w) {
				return true
			}
		}
		return false
	}
	inst := faultInstrument(rec)
	c := faultClass{said: said}
	switch {
	case has("source output off failed"):
		c.what = "the station could not switch the source output off"
		c.check = "that the source's output is off (switch it off by hand) before anyone touches the unit; then call the test engineer"
	case has("interlock open"):
		c.what, c.fixable = "the fixture lid is open", true
		c.check = "that the fixture lid is closed"
	case has("interlock"):
		c.what, c.fixable = "the fixture lid switch could not be read", true
		c.check = "the lid switch's wiring, and the cable and power of " + inst.short
	case has("calibration expired"):
		c.what = inst.long + " is past its calibration due date"
		c.check = "its calibration: it must be recalibrated (or replaced by a calibrated one) before the station tests units"
	case has("wrong instrument", "identifies as"):
		c.what = inst.long + " is not the instrument the station file names"
		c.check = "that the instrument with asset tag " + inst.asset + " is the one connected at " + inst.address
	case has("wrong unit in the fixture"):
		c.what, c.fixable = "the unit in the fixture is not the one scanned", true
		c.check = "that the unit in the fixture is the one whose label was scanned: put that one in, or scan the one that is in"
	case has("timeout", "no reply", "deadline", "stopped answering", "not answering"):
		c.what, c.fixable = inst.long+" stopped answering", true
		c.check = "its cable and power; that no one else is connected to it"
	case has("link down", "eof", "connection refused", "connection reset", "broken pipe", "connection closed", "link failed", "no such file", "no route"):
		c.what, c.fixable = inst.long+" lost its connection", true
		c.check = "its cable and power, and that it is switched on"
	case has("malformed", "garbled", "not quoted"):
		c.what, c.fixable = inst.long+" sent a reply the station could not read", true
		c.check = "its cable and connectors (a loose or noisy link); that no one else is connected to it"
	case has("instrument error", "error queue", "reported error"):
		c.what, c.fixable = inst.long+" reported an error", true
		c.check = "its front panel for a message; that no one changed its settings by hand"
	case has("overload"):
		c.what, c.fixable = inst.long+" read an overload", true
		c.check = "that the unit sits properly in the fixture and its wiring is connected"
	case has("read back", "readback", "read-back"):
		c.what, c.fixable = strings.TrimSpace("the unit did not keep what was written to it "+inst.where), true
		c.check = "that the unit sits properly in the fixture and its port cable is connected; if the next unit does the same, call the test engineer"
	case has("safety cap", "safety"):
		c.what = "a step asked for a level beyond the station's safety limits"
		c.check = "the sequence and station files, with the test engineer: nothing was applied beyond the limits"
	case has("internal error"):
		c.what = "the station software failed"
		c.check = "the station's log (trimline.log), with the test engineer"
	default:
		c.what = "the station could not finish the unit"
		if inst.role != "" {
			c.what = "the station could not finish the unit: " + inst.long + " failed"
		}
		c.check = "what the fault message says, with the test engineer"
	}
	return c
}

// faultInstr names the instrument a fault came from, as the operator reads it.
type faultInstr struct {
	role, asset, address string
	short                string // "the meter"
	where                string // "(DMM-0203 at tcp://127.0.0.1:5025)"; "" when neither is known
	long                 string // short and where: "the meter (DMM-0203 at tcp://127.0.0.1:5025)"
}

// faultInstrument is the instrument rec's fault came from: rec.FaultDetail's
// role, else the one whose address the message names, else the role the
// message names first ("meter: …", "open meter at …", "meter reported …").
func faultInstrument(rec *Record) faultInstr {
	role := ""
	var asset, address string
	if d := rec.FaultDetail; d != nil && d.Role != "" {
		role, asset, address = d.Role, d.Asset, d.Address
	} else {
		best := -1
		for _, in := range rec.Instruments {
			if in.Address != "" && strings.Contains(rec.Fault, in.Address) {
				i := strings.Index(rec.Fault, in.Address)
				if best < 0 || i < best {
					best, role = i, in.Role
				}
			}
		}
		if role == "" {
			for _, in := range rec.Instruments {
				for _, p := range []string{in.Role + ": ", "open " + in.Role + " ", in.Role + " reported", in.Role + " " + in.Asset} {
					if i := strings.Index(rec.Fault, p); i >= 0 && (i == 0 || !isWordByte(rec.Fault[i-1])) && (best < 0 || i < best) {
						best, role = i, in.Role
					}
				}
			}
		}
	}
	if role == "" {
		return faultInstr{short: "an instrument", long: "an instrument"}
	}
	var kind RoleKind
	for _, in := range rec.Instruments {
		if in.Role == role {
			kind = in.RoleKind()
			if asset == "" {
				asset = in.Asset
			}
			if address == "" {
				address = in.Address
			}
		}
	}
	short := "the " + instrumentWord(role, kind)
	var where []string
	if asset != "" {
		where = append(where, asset)
	}
	if address != "" {
		where = append(where, "at "+address)
	}
	fi := faultInstr{role: role, asset: asset, address: address, short: short, long: short}
	if len(where) > 0 {
		fi.where = "(" + strings.Join(where, " ") + ")"
		fi.long += " " + fi.where
	}
	return fi
}

func isWordByte(b byte) bool {
	return b == '_' || b >= 'a' && b <= 'z' || b >= 'A' && b <= 'Z' || b >= '0' && b <= '9'
}

// instrumentWord is what an operator calls the instrument bound to role: the
// role's own name for the usual ones ("source", "meter"), else its kind with
// the role ("meter dmm_hi").
func instrumentWord(role string, kind RoleKind) string {
	var word string
	switch kind {
	case VoltageSource, CurrentSource:
		word = "source"
		if kind == CurrentSource {
			word = "current source"
		}
	case VoltMeter:
		word = "meter"
	case DUTPort:
		word = "unit's port"
	case SwitchRole:
		word = "switch"
	case ThermalRole:
		word = "chamber"
	default:
		return role
	}
	switch {
	case role == RoleDUT && kind == DUTPort, role == word, role == RoleSource && kind == CurrentSource:
		return word
	}
	return word + " " + role
}
