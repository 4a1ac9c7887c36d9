package sequencer

// The step model: a sequence is an ordered list of steps, each of a kind
// registered once in Go. The engine, replay, the TUR prediction, the caps check,
// lint's result catalogue and the certificate read what the kinds declare; none of
// them knows a kind by name.

import (
	"context"
	"fmt"
	"slices"
	"sort"
	"strings"
	"sync"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

// StepKind is one kind of step a sequence file may list: its name (what a file
// writes after kind:), a line saying what it does, and New, which returns a zero
// step whose YAML-tagged fields the loader decodes the step's own keys into.
//
// PerChannel marks a kind that works on one channel of a multi-channel unit
// (sweep, measure, fit, trim): a step of it runs once per channel unless its
// channels: key says otherwise. A kind without it (identify, command, store)
// runs once for the whole unit.
type StepKind struct {
	Name       string
	About      string
	New        func() Step
	PerChannel bool
}

// Step is one decoded step of a sequence. After decoding, the loader calls Check
// once, in list order, with what the earlier steps declared; Check reports every
// problem of the step through c (positioned in the file), declares the step's
// results and the roles it uses. Run does the step for one unit. A step value is
// shared by every unit the sequence runs: Run must keep per-unit state in the
// Unit, never in the step.
//
// Optional capabilities are one-method interfaces: Stimulator (the levels the step
// programs, for the caps check).
type Step interface {
	Check(c *Checker)
	Run(ctx context.Context, u *Unit) error
}

// Stimulator is a step that programs a source: Stimuli lists every level it will
// program, so that the safety caps are checked at load on each of them.
type Stimulator interface {
	Stimuli() []Stimulus
}

// Stimulus is one level a step programs on a source role.
type Stimulus struct {
	Role  string
	Level float64   // in the SI unit of Dim
	Dim   units.Dim // units.Volt for a voltage source, units.Ampere for a current source
	Where string    // "file:line:col" of the step, for messages
	Step  string    // the step's name
}

var kinds = struct {
	sync.RWMutex
	m map[string]StepKind
}{m: map[string]StepKind{}}

// RegisterStep makes a step kind available to sequence files under k.Name. It
// panics on an empty name, a nil New or a name registered twice, so a mistake
// stops the program at start-up. Call it from an init function.
func RegisterStep(k StepKind) {
	kinds.Lock()
	defer kinds.Unlock()
	switch _, dup := kinds.m[k.Name]; {
	case k.Name == "":
		panic("sequencer: RegisterStep with an empty name")
	case k.New == nil:
		panic("sequencer: RegisterStep " + k.Name + " with a nil New")
	case dup:
		panic("sequencer: RegisterStep called twice for " + k.Name)
	}
	kinds.m[k.Name] = k
}

// StepKinds returns the registered kinds sorted by name.
func StepKinds() []StepKind {
	kinds.RLock()
	defer kinds.RUnlock()
	out := make([]StepKind, 0, len(kinds.m))
	for _, k := range kinds.m {
		out = append(out, k)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out
}

func lookupKind(name string) (StepKind, bool) {
	kinds.RLock()
	defer kinds.RUnlock()
	k, ok := kinds.m[name]
	return k, ok
}

func kindNamesText() string {
	var names []string
	for _, k := range StepKinds() {
		names = append(names, k.Name)
	}
	return strings.Join(names, ", ")
}

// StepDecl is one entry of a sequence's step list: the keys every step has, the
// decoded step, and what its Check declared.
type StepDecl struct {
	Name  string // unique in the sequence; later steps and the record refer to it
	Kind  string
	Where string // "file:line:col" of the step in the sequence file
	// SkipIf is the step's skip_if expression as written ("" = always run): over
	// results declared by earlier steps, compiled at load.
	SkipIf string
	skip   *condition
	Step   Step
	// Stage is the stage of the step's measurements: AsFound before a trim,
	// AsLeft after one, Adjustment for the trim itself.
	Stage   Stage
	Roles   []RoleUse   // roles the step uses
	Results []ResultDef // results the step declares, in record order
	// Channel is the unit's channel this entry of the step works on: a step
	// that runs per channel is one entry per channel, each with the same Name,
	// Step and Where; "" for a step of the whole unit (and every step of a
	// one-channel unit).
	Channel string
	chans   []string // the channels the step runs on, before expansion; nil = once
}

// RoleUse is one role a step uses and what kind of instrument it must be.
type RoleUse struct {
	Role string
	Kind RoleKind
}

// Checker is what Step.Check sees: the sequence so far, the earlier steps, and
// the means to report problems at the step's keys and declare results and roles.
type Checker struct {
	doc     *files.Doc
	path    string // YAML path of the step, e.g. "$.steps[3]"
	seq     *Sequence
	decl    *StepDecl
	earlier []*StepDecl
	errs    *files.List
	names   map[string]string // result name → step that declared it
}

// Errorf reports a problem at key of the step (a path relative to the step such
// as "from" or "dacs[1].bits"; "" is the step itself).
func (c *Checker) Errorf(key, format string, args ...any) {
	p := c.path
	if key != "" {
		if !strings.HasPrefix(key, "[") {
			p += "."
		}
		p += key
	}
	*c.errs = append(*c.errs, c.doc.Errorf(p, format, args...))
}

// Pos is the "file:line:col" of key of the step (a path relative to the step,
// as Errorf takes it).
func (c *Checker) Pos(key string) string {
	p := c.path
	if key != "" {
		if !strings.HasPrefix(key, "[") {
			p += "."
		}
		p += key
	}
	line, col := c.doc.Pos(p)
	return fmt.Sprintf("%s:%d:%d", c.doc.Name, line, col)
}

// Where is the step's "file:line:col".
func (c *Checker) Where() string { return c.decl.Where }

// Sequence is the sequence being loaded: its product-level facts (ideal transfer,
// meter defaults, trim DACs) are set before any step is checked.
func (c *Checker) Sequence() *Sequence { return c.seq }

// SetStage sets the stage of the step's measurements (default: AsFound before the
// first trim step, AsLeft after it).
func (c *Checker) SetStage(s Stage) { c.decl.Stage = s }

// Stage is the stage of the step's measurements.
func (c *Checker) Stage() Stage { return c.decl.Stage }

// Earlier returns the earlier step called name, or reports at key that there is
// none (naming the earlier steps of the wanted kinds) and returns nil. With kinds
// given, the step must be of one of them.
func (c *Checker) Earlier(key, name string, kinds ...string) *StepDecl {
	for _, d := range c.earlier {
		if d.Name != name {
			continue
		}
		if len(kinds) > 0 && !slices.Contains(kinds, d.Kind) {
			c.Errorf(key, "step %q is a %s step: expected a %s step", name, d.Kind, strings.Join(kinds, " or "))
			return nil
		}
		c.sameChannels(key, d)
		return d
	}
	var cand []string
	for _, d := range c.earlier {
		if len(kinds) == 0 || slices.Contains(kinds, d.Kind) {
			cand = append(cand, fmt.Sprintf("%q", d.Name))
		}
	}
	hint := "there is none before this step"
	if len(cand) > 0 {
		hint = "earlier ones: " + strings.Join(cand, ", ")
	}
	c.Errorf(key, "no earlier %s step called %q (%s)", strings.Join(append([]string(nil), kinds...), " or "), name, hint)
	return nil
}

// Declare adds a result the step computes. key is where the file names it (for a
// duplicate's message). A result's stage defaults to the step's.
func (c *Checker) Declare(key string, d ResultDef) {
	if d.Stage == 0 {
		d.Stage = c.decl.Stage
	}
	d.Step = c.decl.Name
	if !validName(d.Name) {
		c.Errorf(key, "result name %q: expected a name of letters, digits and _ that begins with a letter", d.Name)
		return
	}
	if other, dup := c.names[d.Name]; dup {
		c.Errorf(key, "result %q is already declared by step %q: every result needs its own name", d.Name, other)
		return
	}
	c.names[d.Name] = c.decl.Name
	c.decl.Results = append(c.decl.Results, d)
}

// Use records that the step uses role, which must be bound to an instrument of
// kind k. A role that is no valid role name is reported at the step.
func (c *Checker) Use(role string, k RoleKind) {
	if !validRoleName(role) {
		c.Errorf("", "role %q: expected a name of lowercase letters, digits and _ beginning with a letter, as the station file binds it", role)
		return
	}
	for _, r := range c.decl.Roles {
		if r.Role == role {
			return
		}
	}
	c.decl.Roles = append(c.decl.Roles, RoleUse{Role: role, Kind: k})
}

// validName reports whether s can be a step's result name: what limit expressions
// and skip_if conditions write.
func validName(s string) bool {
	if s == "" || !(s[0] >= 'a' && s[0] <= 'z' || s[0] >= 'A' && s[0] <= 'Z') {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '_') {
			return false
		}
	}
	return true
}

// sameChannels reports at key a reference to the earlier step d that some channel
// of this step cannot follow: a step of the whole unit cannot use what a step
// kept per channel, and a step on a channel needs d on that channel (or d of the
// whole unit).
func (c *Checker) sameChannels(key string, d *StepDecl) {
	switch {
	case d.chans == nil:
	case c.decl.chans == nil:
		c.Errorf(key, "step %q runs per channel (%s), but this step runs once for the whole unit: give it channels: all, or the same channels", d.Name, strings.Join(d.chans, ", "))
	default:
		for _, ch := range c.decl.chans {
			if !slices.Contains(d.chans, ch) {
				c.Errorf(key, "this step runs on channel %q, where step %q does not run (it runs on %s)", ch, d.Name, strings.Join(d.chans, ", "))
				return
			}
		}
	}
}
