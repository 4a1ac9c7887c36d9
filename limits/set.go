package limits

import (
	"math"

	"github.com/expr-lang/expr/vm"
)

// Set is a compiled limit file: every expression was checked and compiled by Load,
// so judging never meets a syntax error, an unknown name or a unit mismatch. A Set
// is not changed after Load; Judge may be called from any number of goroutines at
// once.
type Set struct {
	Name, Revision, Product string // from the file's limit_set mapping
	File                    string // the name given to Load (the path for LoadFile)
	SHA256                  string // lowercase hex SHA-256 of the exact bytes loaded
	Limits                  []*Limit
	// VariantName is the variant of the file this set is the effective set of
	// (Set.Variant); "" for the base set, the file's limits list.
	VariantName string

	// channels are the unit's channels and perChannel the results measured
	// once per channel, from the catalog Load was given (Catalog.Channels).
	channels   []string
	perChannel map[string][]string // result → its channels

	policy   Policy        // the decision section with defaults filled in (a variant's merged in); zero when not made by Load
	variants *variantTable // the file's variants, shared by all its sets; nil when it has none
}

// Limit is one compiled limit of a Set, in file order. It is either an expression
// limit (expr in the file; Tolerance nil) or a toleranced limit (tolerance in the
// file), which judges its one result under a decision rule.
type Limit struct {
	Name        string // unique within the Set, ignoring case and runs of spaces
	Description string // what the limit is for, in words
	Unit        string // unit the used results are expressed in inside Expr ("uV", "ppm", "code", "")
	// Expr is the expression as written, surrounding white space removed. For a
	// toleranced limit it is the tolerance written as an expression, for records:
	// "within(post_offset, -50, 50)", "post_noise <= 60", "pre_offset >= -20".
	Expr      string
	Uses      []string   // the result names Expr uses, as listed (Load checks each appears in Expr); one for a toleranced limit
	Line      int        // line of the limit's entry ("- name: ...") in the file; for a limit a variant overrides, its entry in the limits list
	Tolerance *Tolerance // nil for an expression limit
	// Channel is the one channel of a multi-channel unit the limit judges (the
	// file's channel key); "" judges every channel when the limit uses a
	// per-channel result, and the whole unit otherwise.
	Channel string

	prog  *vm.Program
	src   *entrySrc // where the limit's keys are in the file
	col   int       // column of the entry's "-"
	sound bool      // Load found no problem in the entry (always true in a Set that Load returned)
	scale float64   // SI value of one Unit: a result in SI is V/scale in Unit
	pow10 bool      // scale is exactly 10^exp10
	exp10 int
}

// Decision rules (ILAC-G8:09/2019 §4.2).
const (
	RuleSimple  = "simple"  // w = 0: the acceptance limits are the tolerance limits
	RuleGuarded = "guarded" // w = r·U: the acceptance interval is the tolerance shrunk by w on each bounded side
)

// Tolerance is a toleranced limit's tolerance interval, in the limit's unit, and
// the decision rule it is judged by (the limit's own rule, guard_factor and
// statements, or else the file's decision defaults).
type Tolerance struct {
	Lower, Upper *float64 // tolerance limits TL; nil = unbounded on that side. At least one is set; Lower < Upper
	Rule         string   // RuleSimple or RuleGuarded
	GuardFactor  float64  // r in w = r·U (used by RuleGuarded)
	Binary       bool     // binary statement (pass/fail) rather than the four ILAC-G8 zones
}

// setScale records the SI value of one unit of l.Unit.
func (l *Limit) setScale(scale float64) {
	l.scale = scale
	for e := -24; e <= 24; e++ {
		if math.Pow10(e) == scale {
			l.pow10, l.exp10 = true, e
			return
		}
	}
}

// Label names the set for a person: its name, revision, variant and file
// ("BRX-200 end-of-line limits rev 6 variant grade-H (limits.yaml)"); "" for nil.
func (s *Set) Label() string {
	if s == nil {
		return ""
	}
	l := s.Name
	if s.Revision != "" {
		l += " rev " + s.Revision
	}
	if s.VariantName != "" {
		l += " variant " + s.VariantName
	}
	if s.File != "" {
		l += " (" + s.File + ")"
	}
	return l
}

// setChannels records the channels and per-channel results of cat.
func (s *Set) setChannels(cat Catalog) {
	s.channels = cat.Channels()
	if len(s.channels) == 0 {
		return
	}
	s.perChannel = map[string][]string{}
	for k := range cat {
		if n, ch := SplitChannelKey(k); ch != "" && s.perChannel[n] == nil {
			s.perChannel[n] = cat.ChannelsOf(n)
		}
	}
}

// Channels returns the unit's channels the set was loaded with, nil for a
// one-channel product.
func (s *Set) Channels() []string {
	if s == nil {
		return nil
	}
	return append([]string(nil), s.channels...)
}
