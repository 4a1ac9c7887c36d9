package limits

import (
	"fmt"
	"strings"

	"github.com/goccy/go-yaml/ast"

	"trimline/instruments/files"
)

// A limit file may hold, besides its limits list (the base set), variants: the
// limits of other product revisions or grades, each written as changes to the
// base set.
//
//	variants:
//	  - name: grade-H                 # unique within the file (ignoring case and runs of spaces)
//	    description: High-accuracy grade, selected parts.
//	    revisions: [C, D]             # optional: the product revisions it is for (Set.VariantFor)
//	    overrides:                    # optional: change limits of the base list, matched by name
//	      - name: offset after trim
//	        tolerance: {lower: -400, upper: 400}
//	    add:                          # optional: limits only this variant has (full limit entries)
//	      - name: ...
//	    remove: [trim headroom]       # optional: base limits this variant drops
//	    decision: {min_tur: 3}        # optional: keys of the decision section that differ
//
// An override names a limit of the base list and gives some of description,
// unit, uses, expr, tolerance, rule, guard_factor and statements, which replace
// the base limit's. A limit keeps one kind: an override's expr drops the base's
// tolerance (and its rule, guard_factor and statements), an override's tolerance
// drops the base's expr. An override that changes the unit must give the expr or
// tolerance again, in the new unit.

// variantForm is one entry of the file's variants list.
type variantForm struct {
	Name        *string       `yaml:"name"`
	Description *string       `yaml:"description"`
	Revisions   *[]string     `yaml:"revisions"`
	Overrides   []*limitForm  `yaml:"overrides"`
	Add         []*limitForm  `yaml:"add"`
	Remove      *[]string     `yaml:"remove"`
	Decision    *decisionForm `yaml:"decision"`
}

// decodedVariants is the variants list, when it decoded.
type decodedVariants struct {
	ok      bool // decoded without error (or absent)
	present bool
	forms   []*variantForm
}

// overrideKeys are the keys an override may give besides the name, in the order
// messages list them.
var overrideKeys = []string{"description", "unit", "uses", "expr", "tolerance", "rule", "guard_factor", "statements", "channel"}

// VariantInfo describes one variant of a limit file (Set.Variants).
type VariantInfo struct {
	Name        string   // as written, surrounding white space removed
	Description string   // what the variant is for, in words
	Revisions   []string // product revisions the variant is for, as listed; may be empty
}

// variantTable is the variants of one loaded file, shared by the base set and every
// variant's effective set.
type variantTable struct {
	base *Set
	list []variantEntry
}

type variantEntry struct {
	info VariantInfo
	set  *Set
}

// Variants describes the file's variants in file order; nil when it has none. Any
// of the file's sets (the base set or a variant's) gives the same list.
func (s *Set) Variants() []VariantInfo {
	if s == nil || s.variants == nil {
		return nil
	}
	out := make([]VariantInfo, len(s.variants.list))
	for i, v := range s.variants.list {
		out[i] = v.info
		out[i].Revisions = append([]string(nil), v.info.Revisions...)
	}
	return out
}

// Variant returns the effective set of the named variant (names compare ignoring
// case and runs of spaces), or the base set for "": the base limits in file order
// with the variant's overrides applied in place and its removals dropped, then its
// added limits, judged under the file's decision section with the variant's
// decision keys merged in. The set's VariantName records the variant; Name,
// Revision, Product, File and SHA256 are the file's.
//
// Load compiles every variant's effective set and rejects the file on any problem
// in one, so Variant never fails for a name the file defines; an unknown name is
// an error naming the known ones. The same *Set is returned on every call, and
// may be called on any of the file's sets.
func (s *Set) Variant(name string) (*Set, error) {
	if s == nil {
		return nil, fmt.Errorf("no limit set")
	}
	tab := s.variants
	base := s
	if tab != nil {
		base = tab.base
	}
	if strings.TrimSpace(name) == "" {
		return base, nil
	}
	var known []string
	if tab != nil {
		k := nameKey(name)
		for _, v := range tab.list {
			if nameKey(v.info.Name) == k {
				return v.set, nil
			}
			known = append(known, fmt.Sprintf("%q", v.info.Name))
		}
	}
	if len(known) == 0 {
		return nil, fmt.Errorf("limit set %s has no variant %q: the file defines no variants", base.Label(), name)
	}
	return nil, fmt.Errorf("limit set %s has no variant %q (known: %s)", base.Label(), name, strings.Join(known, ", "))
}

// VariantFor returns the effective set of the variant whose revisions list the
// product revision (ignoring case and surrounding white space), or the base set
// when none does. Load makes sure no revision is listed by two variants.
func (s *Set) VariantFor(revision string) *Set {
	if s == nil || s.variants == nil {
		return s
	}
	r := strings.TrimSpace(revision)
	if r != "" {
		for _, v := range s.variants.list {
			for _, vr := range v.info.Revisions {
				if strings.EqualFold(vr, r) {
					return v.set
				}
			}
		}
	}
	return s.variants.base
}

// variants checks the variants section and compiles each variant's effective set
// into base.variants.
func (l *loader) variants(vs decodedVariants, base *Set, ents decodedEntries) {
	const path = "$.variants"
	if !vs.ok || !vs.present {
		return
	}
	if len(vs.forms) == 0 {
		if l.doc.Has(path) {
			l.errs = append(l.errs, l.doc.KeyErrorf(path, "\"variants\" is empty: give at least one variant (name, description and what differs), or remove it"))
		}
		return
	}
	vl := &variantLoader{loader: l, base: base, ents: ents, byName: map[string]int{},
		names: map[string]int{}, revs: map[string]revSeen{}}
	for i, f := range ents.forms {
		var n string
		switch {
		case ents.good[i] && f != nil && f.Name != nil:
			n = strings.TrimSpace(*f.Name)
		case !ents.good[i]:
			// An entry that did not decode (reported already) is still a limit a
			// variant may name; its name is read from the file as written.
			if node := l.nodeAt(fmt.Sprintf("$.limits[%d].name", i)); node != nil && node.GetToken() != nil {
				n = strings.TrimSpace(node.GetToken().Value)
			}
		}
		if k := nameKey(n); k != "" {
			if _, dup := vl.byName[k]; !dup {
				vl.byName[k] = i
				vl.baseNames = append(vl.baseNames, fmt.Sprintf("%q", n))
			}
		}
	}
	tab := &variantTable{base: base}
	base.variants = tab
	for i, f := range vs.forms {
		if v, ok := vl.variant(i, f); ok {
			v.set.variants = tab
			tab.list = append(tab.list, v)
		}
	}
}

type revSeen struct {
	variant string
	line    int
}

type variantLoader struct {
	*loader
	base      *Set
	ents      decodedEntries
	byName    map[string]int // base limits: name key → entry index
	baseNames []string       // quoted, in file order, for messages
	names     map[string]int // variants so far: name key → line
	revs      map[string]revSeen
}

// override is one checked override entry.
type override struct {
	form *limitForm
	src  *entrySrc
}

// variant checks variant i and compiles its effective set. ok is false for an
// empty entry.
func (l *variantLoader) variant(i int, f *variantForm) (variantEntry, bool) {
	path := fmt.Sprintf("$.variants[%d]", i)
	at := l.entryAt("$.variants", i)
	if f == nil {
		l.errs = append(l.errs, l.doc.At(at.line, at.col, "empty variant entry: expected name, description and its overrides, add, remove or decision"))
		return variantEntry{}, false
	}
	mark := len(l.errs)
	missing := func(at place, key string) func() *files.Error {
		return func() *files.Error { return l.doc.At(at.line, at.col, "missing required key %q", key) }
	}
	info := VariantInfo{
		Name:        l.requiredAt(path, "name", f.Name, true, missing(at, "name")),
		Description: l.requiredAt(path, "description", f.Description, true, missing(at, "description")),
	}
	label := info.Name
	if k := nameKey(info.Name); k != "" {
		if first, dup := l.names[k]; dup {
			l.errs = append(l.errs, l.doc.Errorf(path+".name",
				"duplicate variant name %q (also the name of the variant at line %d)", info.Name, first))
		} else {
			l.names[k] = at.line
		}
	}
	l.revisions(path, at.line, f, &info)

	// The decision section: the file's, with the variant's keys.
	pol, polOK := l.policy, l.policyOK
	if f.Decision != nil || l.doc.Has(path+".decision") {
		polOK = l.decisionAt(path+".decision", f.Decision, &pol) && polOK
	}

	over := l.overrides(path, label, f.Overrides)
	removed := l.removals(path, label, f.Remove, over)

	set := &Set{Name: l.base.Name, Revision: l.base.Revision, Product: l.base.Product, File: l.base.File,
		SHA256: l.base.SHA256, VariantName: info.Name, policy: pol, channels: l.base.channels, perChannel: l.base.perChannel}
	basePol, baseOK := l.policy, l.policyOK
	l.policy, l.policyOK = pol, polOK
	defaults := pol.Rule != basePol.Rule || pol.GuardFactor != basePol.GuardFactor || pol.Binary != basePol.Binary
	firstLine := map[string]int{}
	for k, bf := range l.ents.forms {
		baseLim := l.byEntry[k]
		if !l.ents.good[k] || removed[k] || baseLim == nil {
			continue
		}
		lim := baseLim
		switch o := over[k]; {
		case o != nil:
			o.src.base, o.src.at = baseLim.src.base, baseLim.src.at
			lim = l.compiled(o.src, l.merge(bf, o.form, o.src))
		case defaults && baseLim.Tolerance != nil:
			// The limit takes its rule from the decision section, which differs.
			again := l.compiled(&entrySrc{base: baseLim.src.base, at: baseLim.src.at, variant: info.Name}, bf)
			if t := again.Tolerance; t == nil || t.Rule != baseLim.Tolerance.Rule || t.GuardFactor != baseLim.Tolerance.GuardFactor || t.Binary != baseLim.Tolerance.Binary {
				lim = again
			}
		}
		if lim == nil {
			continue
		}
		if key := nameKey(lim.Name); key != "" {
			if _, dup := firstLine[key]; !dup {
				firstLine[key] = lim.Line
			}
		}
		set.Limits = append(set.Limits, lim)
	}
	for j, af := range f.Add {
		s := &entrySrc{base: fmt.Sprintf("%s.add[%d]", path, j), at: l.entryAt(path+".add", j), variant: info.Name}
		lim := l.compiled(s, af)
		if lim == nil {
			continue
		}
		if key := nameKey(lim.Name); key != "" {
			if first, dup := firstLine[key]; dup {
				lim.sound = false
				l.errs = append(l.errs, l.doc.Errorf(s.path("name"),
					"duplicate limit name %q in variant %q (also the name of the limit at line %d): an added limit needs a name of its own, or override the base limit instead", lim.Name, label, first))
			} else {
				firstLine[key] = lim.Line
			}
		}
		set.Limits = append(set.Limits, lim)
	}
	l.policy, l.policyOK = basePol, baseOK
	if len(set.Limits) == 0 && len(removed) > 0 {
		l.errs = append(l.errs, l.doc.At(at.line, at.col,
			"variant %q has no limits left: it removes every limit of the base list and adds none, and a unit judged on no limits never passes", label))
	}
	l.settle(mark, i, label)
	return variantEntry{info: info, set: set}, true
}

// revisions checks the variant's revisions list and fills info.Revisions.
func (l *variantLoader) revisions(path string, line int, f *variantForm, info *VariantInfo) {
	rp := path + ".revisions"
	if f.Revisions == nil {
		if l.doc.Has(rp) {
			l.errs = append(l.errs, l.doc.KeyErrorf(rp, "\"revisions\" has no value: list the product revisions, e.g. [C, D], or remove it"))
		}
		return
	}
	for j, r := range *f.Revisions {
		p := fmt.Sprintf("%s[%d]", rp, j)
		r = strings.TrimSpace(r)
		if r == "" {
			l.errs = append(l.errs, l.doc.Errorf(p, "revision %d is empty", j+1))
			continue
		}
		k := strings.ToLower(r)
		if prev, dup := l.revs[k]; dup {
			if prev.variant == info.Name {
				l.errs = append(l.errs, l.doc.Errorf(p, "revision %q is listed twice in variant %q", r, info.Name))
			} else {
				l.errs = append(l.errs, l.doc.Errorf(p,
					"revision %q is already listed by variant %q (line %d): a product revision selects one variant", r, prev.variant, prev.line))
			}
			continue
		}
		l.revs[k] = revSeen{info.Name, line}
		info.Revisions = append(info.Revisions, r)
	}
}

// overrides checks the variant's overrides, returned by the index of the base
// entry each changes.
func (l *variantLoader) overrides(path, variant string, forms []*limitForm) map[int]*override {
	out := map[int]*override{}
	for j, of := range forms {
		op := fmt.Sprintf("%s.overrides[%d]", path, j)
		oat := l.entryAt(path+".overrides", j)
		if of == nil {
			l.errs = append(l.errs, l.doc.At(oat.line, oat.col,
				"empty override entry: expected the name of a base limit and the keys it changes (%s)", strings.Join(overrideKeys, ", ")))
			continue
		}
		name := l.requiredAt(op, "name", of.Name, true, func() *files.Error {
			return l.doc.At(oat.line, oat.col, "missing required key \"name\": an override names the base limit it changes")
		})
		if name == "" {
			continue
		}
		k, ok := l.byName[nameKey(name)]
		if !ok {
			l.errs = append(l.errs, l.doc.Errorf(op+".name",
				"override of unknown limit %q in variant %q: an override changes a limit of the limits list (%s); use add for a new limit",
				name, variant, strings.Join(l.baseNames, ", ")))
			continue
		}
		if !l.ents.good[k] {
			continue // the base entry has problems of its own, already reported
		}
		if prev := out[k]; prev != nil {
			l.errs = append(l.errs, l.doc.Errorf(op+".name",
				"limit %q is overridden twice in variant %q (also at line %d): give all its changes in one override", name, variant, prev.src.overAt.line))
			continue
		}
		s := &entrySrc{over: op, overAt: oat, gave: map[string]bool{}, dropped: map[string]bool{}, variant: variant}
		for _, key := range overrideKeys {
			if l.doc.Has(op + "." + key) {
				s.gave[key] = true
			}
		}
		switch {
		case len(s.gave) == 0:
			l.errs = append(l.errs, l.doc.At(oat.line, oat.col,
				"override of %q in variant %q changes nothing: give some of %s", name, variant, strings.Join(overrideKeys, ", ")))
		case s.gave["unit"] && !s.gave["expr"] && !s.gave["tolerance"]:
			l.errs = append(l.errs, l.doc.KeyErrorf(op+".unit",
				"override of %q in variant %q changes the unit but not the numbers: give the expr or tolerance again, in the new unit", name, variant))
		}
		out[k] = &override{form: of, src: s}
	}
	return out
}

// removals checks the variant's remove list and returns the base entries it drops.
func (l *variantLoader) removals(path, variant string, names *[]string, over map[int]*override) map[int]bool {
	out := map[int]bool{}
	rp := path + ".remove"
	if names == nil {
		if l.doc.Has(rp) {
			l.errs = append(l.errs, l.doc.KeyErrorf(rp, "\"remove\" has no value: list the names of the base limits the variant drops, or remove it"))
		}
		return out
	}
	for j, n := range *names {
		p := fmt.Sprintf("%s[%d]", rp, j)
		n = strings.TrimSpace(n)
		k, ok := l.byName[nameKey(n)]
		switch {
		case !ok:
			l.errs = append(l.errs, l.doc.Errorf(p,
				"remove of unknown limit %q in variant %q: remove drops limits of the limits list (%s)", n, variant, strings.Join(l.baseNames, ", ")))
		case out[k]:
			l.errs = append(l.errs, l.doc.Errorf(p, "limit %q is listed twice in remove", n))
		case over[k] != nil:
			l.errs = append(l.errs, l.doc.Errorf(p,
				"limit %q is both overridden (line %d) and removed in variant %q: keep one", n, over[k].src.overAt.line, variant))
		default:
			out[k] = true
		}
	}
	return out
}

// compiled checks and compiles a limit of a variant, marking it sound or not.
func (l *variantLoader) compiled(s *entrySrc, f *limitForm) *Limit {
	before := len(l.errs)
	lim := l.limit(s, f)
	if lim != nil {
		lim.sound = len(l.errs) == before
	}
	return lim
}

// merge returns the base entry bf with the keys the override of gives, recording in
// s the base keys it drops: a limit is an expression or a toleranced limit, not
// both.
func (l *variantLoader) merge(bf, of *limitForm, s *entrySrc) *limitForm {
	m := *bf
	fields := map[string]func(from *limitForm){
		"description":  func(f *limitForm) { m.Description = f.Description },
		"unit":         func(f *limitForm) { m.Unit = f.Unit },
		"uses":         func(f *limitForm) { m.Uses = f.Uses },
		"expr":         func(f *limitForm) { m.Expr = f.Expr },
		"tolerance":    func(f *limitForm) { m.Tolerance = f.Tolerance },
		"rule":         func(f *limitForm) { m.Rule = f.Rule },
		"guard_factor": func(f *limitForm) { m.GuardFactor = f.GuardFactor },
		"statements":   func(f *limitForm) { m.Statements = f.Statements },
		"channel":      func(f *limitForm) { m.Channel = f.Channel },
	}
	for _, key := range overrideKeys {
		if s.gave[key] {
			fields[key](of)
		}
	}
	drop := func(keys ...string) {
		for _, key := range keys {
			if !s.gave[key] {
				s.dropped[key] = true
				fields[key](&limitForm{})
			}
		}
	}
	switch {
	case s.gave["expr"] && !s.gave["tolerance"]:
		drop("tolerance", "rule", "guard_factor", "statements")
	case s.gave["tolerance"] && !s.gave["expr"]:
		drop("expr")
	}
	return &m
}

// settle tidies the problems found since mark in variant i: one that the base
// list already has (a base entry compiled again for the variant) is dropped, and
// one outside the variant's own lines (in a base entry it changes) names the
// variant.
func (l *variantLoader) settle(mark, i int, variant string) {
	type key struct {
		line, col int
		msg       string
	}
	seen := map[key]bool{}
	for _, e := range l.errs[:mark] {
		seen[key{e.Line, e.Col, e.Msg}] = true
	}
	from, to := l.variantLines(i)
	kept := l.errs[:mark]
	for _, e := range l.errs[mark:] {
		if seen[key{e.Line, e.Col, e.Msg}] {
			continue
		}
		if e.Line > 0 && (e.Line < from || e.Line > to) && variant != "" {
			e = l.doc.At(e.Line, e.Col, "%s (in variant %q)", e.Msg, variant)
		}
		kept = append(kept, e)
	}
	l.errs = kept
}

// variantLines returns the first and last line of variant entry i.
func (l *variantLoader) variantLines(i int) (from, to int) {
	from = l.entryAt("$.variants", i).line
	to = len(l.src)
	if seq, ok := l.nodeAt("$.variants").(*ast.SequenceNode); ok && i+1 < len(seq.Entries) &&
		seq.Entries[i+1].Start != nil && seq.Entries[i+1].Start.Position != nil {
		return from, seq.Entries[i+1].Start.Position.Line - 1
	}
	if l.root != nil {
		for k, mv := range l.root.Values {
			if mv.Key != nil && mv.Key.GetToken() != nil && mv.Key.GetToken().Value == "variants" && k+1 < len(l.root.Values) {
				if tk := l.root.Values[k+1].Key.GetToken(); tk != nil && tk.Position != nil {
					to = tk.Position.Line - 1
				}
			}
		}
	}
	return from, to
}
