package limits

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/expr-lang/expr"
	exprast "github.com/expr-lang/expr/ast"
	"github.com/expr-lang/expr/file"
	"github.com/expr-lang/expr/vm"
	"github.com/goccy/go-yaml/ast"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

// The file as decoded. Pointers tell a missing key from an empty value.
type fileForm struct {
	LimitSet *headerForm    `yaml:"limit_set"`
	Decision *decisionForm  `yaml:"decision"`
	Limits   []*limitForm   `yaml:"limits"`
	Variants []*variantForm `yaml:"variants"`
}

type headerForm struct {
	Name     *string `yaml:"name"`
	Revision *string `yaml:"revision"`
	Product  *string `yaml:"product"`
}

type limitForm struct {
	Name        *string        `yaml:"name"`
	Description *string        `yaml:"description"`
	Unit        *string        `yaml:"unit"`
	Uses        *[]string      `yaml:"uses"`
	Expr        *string        `yaml:"expr"`
	Tolerance   *toleranceForm `yaml:"tolerance"`
	Rule        *string        `yaml:"rule"`
	GuardFactor *float64       `yaml:"guard_factor"`
	Statements  *string        `yaml:"statements"`
	Channel     *string        `yaml:"channel"`
}

// LoadFile reads the limit file at path and loads it with Load, naming it path in
// the Set and in messages. The file is read with files.ReadFile: one larger than its
// bound is a positioned *files.Error, a read error comes back wrapped with the path.
func LoadFile(path string, cat Catalog) (*Set, error) {
	data, err := files.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return Load(path, data, cat)
}

// Load decodes and compiles the limit file data, called name in messages and in
// Set.File. cat lists the results that limits may use, with their dimensions.
//
// The file is decoded strictly (unknown keys, duplicate keys and wrong types are
// errors), every required key must be present, every name in uses must be in cat,
// each limit's unit must fit the dimension of every result it uses, limit names
// must be unique, and every limit has exactly one of expr and tolerance.
//
// Every expression must compile to a true/false value using only the names in its
// uses (as float64, in the limit's unit), expr-lang's built-in functions (abs, min,
// max, ...; not the clock ones: now, date, duration, timezone) and the functions
// added with RegisterFunc (within and outside come built in). Every name in uses
// must also appear in the expression, and a constant within/outside range must
// have lo ≤ hi. An expression limit cannot set rule, guard_factor or statements.
//
// A limit may name one channel of a multi-channel unit (channel: "2"): one of
// the channels the catalog lists (Catalog.Channels), on which every per-channel
// result it uses is measured; a limit of results of the whole unit takes none.
// See Set.Judge for how a limit over per-channel results is judged.
//
// A toleranced limit uses exactly one result; its tolerance has lower, upper or
// both, plain finite numbers in the limit's unit with lower < upper. It may set
// its own rule (simple, guarded), guard_factor (> 0, only with rule guarded) and
// statements (binary, non-binary); otherwise the file's optional decision section
// gives them. That section's keys are all optional: coverage (a percentage above
// 0 and below 100 %, default 95.45 %), rule (default simple), guard_factor
// (default 1), statements (default binary), conditional_pass (ship, review or
// fail; default review), conditional_fail (fail or review; default fail), min_tur
// (a number above 0, N for N:1, "4:1" is also read; default 4) and tur_policy
// (warn or refuse; default warn). See Set.Policy.
//
// The optional variants list holds the limits of other product revisions or
// grades as changes to the limits list (see Set.Variant). Each variant has a
// name, unique in the file, and a description, and may have revisions (product
// revisions, none listed by two variants), overrides (entries naming a limit of
// the limits list with the keys that change: description, unit, uses, expr,
// tolerance, rule, guard_factor, statements), add (full limit entries, their
// names unique in the variant's set), remove (names of limits of the limits list,
// neither overridden nor removed twice) and decision (keys of the decision
// section that differ). Every variant's effective set is compiled with the same
// checks as the limits list: a problem that a variant causes in an entry of the
// limits list points there and names the variant.
//
// On any problem Load returns a nil Set and a files.List holding every problem it
// found, sorted by line (a file without a top-level limit_set key gets the single
// error "not a limit file"), each a *files.Error positioned file:line:col with an
// excerpt of the file; a problem inside an expression points at the offending
// character of the file. Load is safe for concurrent use.
func Load(name string, data []byte, cat Catalog) (*Set, error) {
	set, errs, _ := load(name, data, cat)
	if len(errs) > 0 {
		return nil, errs
	}
	return set, nil
}

// load is Load, keeping what it could check when there are problems: the Set
// (nil only when the file could not be parsed or is not a limit file) holds every
// limit entry that decoded, each marked sound or not (Limit.sound), with the
// problems sorted as Load returns them, and the parsed document for positions.
func load(name string, data []byte, cat Catalog) (*Set, files.List, *files.Doc) {
	var doc *files.Doc
	err := yamlSafely(name, func() (err error) { doc, err = files.Parse(name, data); return err })
	if err != nil {
		return nil, asList(name, err), nil
	}
	sum := sha256.Sum256(data)
	l := &loader{doc: doc, cat: cat}
	l.src = splitRunes(data)
	l.ast, l.root = doc.File(), doc.Root()
	if len(l.ast.Docs) > 1 {
		l.errs = append(l.errs, doc.At(1, 1, "expected one YAML document in a limit file, found %d", len(l.ast.Docs)))
	}
	l.funcOpts = funcOptions()

	if !doc.Has("$.limit_set") {
		// Some other file: its own keys would only add noise.
		msg := "not a limit file: expected a top-level \"limit_set\" key (name, revision, product)"
		if keys := l.topKeys(); len(keys) > 0 {
			msg += ", found " + strings.Join(keys, ", ")
		}
		return nil, files.List{doc.At(1, 1, "%s", msg)}, doc
	}
	hdr, dec, entries, vars := l.decode()
	set := &Set{File: name, SHA256: hex.EncodeToString(sum[:])}
	set.setChannels(cat)
	if hdr.ok {
		l.header(hdr.form, set)
	}
	l.policy = defaultPolicy()
	l.policyOK = dec.ok
	if dec.ok {
		l.decision(dec.form)
	}
	set.policy = l.policy
	set.Limits = l.limits(entries)
	l.variants(vars, set, entries)

	if len(l.errs) > 0 {
		return set, l.sorted(), doc
	}
	return set, nil, doc
}

type loader struct {
	doc      *files.Doc
	src      [][]rune
	ast      *ast.File
	root     *ast.MappingNode
	cat      Catalog
	funcOpts []expr.Option
	errs     files.List
	byEntry  map[int]*Limit // the limits list's limits by entry index
	policy   Policy         // the decision section, defaults filled in (a variant's, while its limits are compiled)
	policyOK bool           // the decision section decoded (or is absent), so per-limit checks against it are sound
}

// topKeys returns the file's top-level keys, quoted, in file order.
func (l *loader) topKeys() []string {
	if l.root == nil {
		return nil
	}
	var keys []string
	for _, mv := range l.root.Values {
		if mv.Key != nil && mv.Key.GetToken() != nil {
			keys = append(keys, strconv.Quote(mv.Key.GetToken().Value))
		}
	}
	return keys
}

type decodedHeader struct {
	form *headerForm
	ok   bool // decoded without error, so it can be checked
}

type decodedDecision struct {
	form *decisionForm
	ok   bool // decoded without error (or absent), so it can be checked
}

// decodedEntries is the limits list: whether it decoded (ok), and per entry the
// decoded form, or nil when that entry had a decoding error.
type decodedEntries struct {
	ok      bool // the list as a whole could be checked
	present bool
	forms   []*limitForm
	good    []bool
}

// decode decodes the file strictly. files.Doc.Decode stops at the first problem, so
// when there is one, each top-level section and each limit entry is decoded again
// on its own (the rest of the file blanked out, line numbers kept) to find the
// problems in the others and to check the entries that are sound.
func (l *loader) decode() (decodedHeader, decodedDecision, decodedEntries, decodedVariants) {
	var whole fileForm
	err := yamlSafely(l.doc.Name, func() error { return l.doc.Decode(&whole) })
	if err == nil {
		good := make([]bool, len(whole.Limits))
		for i := range good {
			good[i] = true
		}
		return decodedHeader{whole.LimitSet, true}, decodedDecision{whole.Decision, true},
			decodedEntries{ok: true, present: l.doc.Has("$.limits"), forms: whole.Limits, good: good},
			decodedVariants{ok: true, present: l.doc.Has("$.variants"), forms: whole.Variants}
	}
	l.addDecodeErr(err)
	var hdr decodedHeader
	var dec decodedDecision
	var ents decodedEntries
	var vars decodedVariants
	if !l.maskable() {
		return hdr, dec, ents, vars
	}
	keys := l.root.Values
	for i, mv := range keys {
		from := mv.Key.GetToken().Position.Line
		to := len(l.src)
		if i+1 < len(keys) {
			to = keys[i+1].Key.GetToken().Position.Line - 1
		}
		key := mv.Key.GetToken().Value
		seq, isSeq := mv.Value.(*ast.SequenceNode)
		if key == "limits" && isSeq && blockEntries(seq) {
			ents = decodedEntries{ok: true, present: true, forms: make([]*limitForm, len(seq.Values)), good: make([]bool, len(seq.Values))}
			for j, e := range seq.Entries {
				efrom := e.Start.Position.Line
				eto := to
				if j+1 < len(seq.Entries) {
					eto = seq.Entries[j+1].Start.Position.Line - 1
				}
				var f fileForm
				if err := l.decodeLines(&f, from, from, efrom, eto); err != nil {
					l.addDecodeErr(err)
				} else if len(f.Limits) == 1 {
					ents.forms[j], ents.good[j] = f.Limits[0], true
				}
			}
			continue
		}
		var f fileForm
		if err := l.decodeLines(&f, from, to, from, to); err != nil {
			l.addDecodeErr(err)
			continue
		}
		switch key {
		case "limit_set":
			hdr = decodedHeader{f.LimitSet, true}
		case "decision":
			dec = decodedDecision{f.Decision, true}
		case "limits":
			good := make([]bool, len(f.Limits))
			for j := range good {
				good[j] = true
			}
			ents = decodedEntries{ok: true, present: true, forms: f.Limits, good: good}
		case "variants":
			vars = decodedVariants{ok: true, present: true, forms: f.Variants}
		}
	}
	if !l.doc.Has("$.limits") {
		ents = decodedEntries{ok: true}
	}
	if !l.doc.Has("$.decision") {
		dec = decodedDecision{ok: true}
	}
	return hdr, dec, ents, vars
}

// blockEntries reports whether seq is a non-empty block sequence whose entries'
// "-" positions are known.
func blockEntries(seq *ast.SequenceNode) bool {
	if seq.IsFlowStyle || len(seq.Values) == 0 || len(seq.Entries) != len(seq.Values) {
		return false
	}
	for _, e := range seq.Entries {
		if e == nil || e.Start == nil || e.Start.Position == nil {
			return false
		}
	}
	return true
}

// maskable reports whether the file is laid out so that its sections can be decoded
// one at a time: a block mapping at the top with distinct keys on their own lines,
// and no anchors or aliases tying sections together.
func (l *loader) maskable() bool {
	if l.root == nil || l.root.IsFlowStyle || len(l.ast.Docs) != 1 {
		return false
	}
	seen := map[string]bool{}
	last := 0
	for _, mv := range l.root.Values {
		if mv == nil || mv.Key == nil {
			return false
		}
		tk := mv.Key.GetToken()
		if tk == nil || tk.Position == nil || tk.Position.Line <= last || seen[tk.Value] {
			return false
		}
		seen[tk.Value] = true
		last = tk.Position.Line
	}
	ok := true
	ast.Walk(visitFunc(func(n ast.Node) bool {
		switch n.(type) {
		case *ast.AnchorNode, *ast.AliasNode:
			ok = false
		}
		return ok
	}), l.root)
	return ok
}

type visitFunc func(ast.Node) bool

func (f visitFunc) Visit(n ast.Node) ast.Visitor {
	if f(n) {
		return f
	}
	return nil
}

// decodeLines decodes only lines a1..a2 and b1..b2 of the file (1-based, inclusive),
// every other line blanked so that positions stay those of the file.
func (l *loader) decodeLines(v any, a1, a2, b1, b2 int) error {
	var b strings.Builder
	for i, line := range l.src {
		n := i + 1
		if (n >= a1 && n <= a2) || (n >= b1 && n <= b2) {
			b.WriteString(string(line))
		}
		if i < len(l.src)-1 {
			b.WriteByte('\n')
		}
	}
	return yamlSafely(l.doc.Name, func() error {
		d, err := files.Parse(l.doc.Name, []byte(b.String()))
		if err != nil {
			return err
		}
		return d.Decode(v)
	})
}

// addDecodeErr records the problems in err, re-made against the whole file so that
// the excerpts show the real lines.
func (l *loader) addDecodeErr(err error) {
	fe := files.Errs(err)
	if fe == nil {
		l.errs = append(l.errs, &files.Error{File: l.doc.Name, Msg: err.Error()})
		return
	}
	for _, e := range fe {
		if e.Line > 0 {
			e = l.doc.At(e.Line, e.Col, "%s", e.Msg)
		}
		l.errs = append(l.errs, e)
	}
}

func (l *loader) header(h *headerForm, set *Set) {
	if h == nil {
		l.errs = append(l.errs, l.doc.KeyErrorf("$.limit_set", "limit_set is empty: expected name, revision and product"))
		return
	}
	set.Name = l.required("$.limit_set", "name", h.Name, true)
	set.Revision = l.required("$.limit_set", "revision", h.Revision, true)
	set.Product = l.required("$.limit_set", "product", h.Product, true)
}

// required checks the key under the mapping at path: present, not null, and (when
// nonBlank) not empty. It returns the value with surrounding white space removed.
func (l *loader) required(path, key string, v *string, nonBlank bool) string {
	return l.requiredAt(path, key, v, nonBlank, func() *files.Error {
		return l.doc.KeyErrorf(path, "missing required key %q", key)
	})
}

func (l *loader) requiredAt(path, key string, v *string, nonBlank bool, missing func() *files.Error) string {
	p := path + "." + key
	if v == nil {
		if l.doc.Has(p) {
			l.errs = append(l.errs, l.doc.Errorf(p, "%q has no value", key))
		} else {
			l.errs = append(l.errs, missing())
		}
		return ""
	}
	s := strings.TrimSpace(*v)
	if nonBlank && s == "" {
		l.errs = append(l.errs, l.doc.Errorf(p, "%q is empty", key))
	}
	return s
}

func (l *loader) limits(ents decodedEntries) []*Limit {
	if !ents.ok {
		return nil
	}
	if !ents.present {
		l.errs = append(l.errs, l.doc.At(1, 1, "missing required key \"limits\" (the list of limits)"))
		return nil
	}
	if len(ents.forms) == 0 {
		l.errs = append(l.errs, l.doc.Errorf("$.limits", "\"limits\" is empty: expected at least one limit"))
		return nil
	}
	var out []*Limit
	l.byEntry = map[int]*Limit{}
	firstLine := map[string]int{}
	for i, f := range ents.forms {
		if !ents.good[i] {
			continue
		}
		before := len(l.errs)
		lim := l.limit(l.baseSrc(i), f)
		if lim == nil {
			continue
		}
		lim.sound = len(l.errs) == before
		l.byEntry[i] = lim
		key := strings.ToLower(strings.Join(strings.Fields(lim.Name), " "))
		if key != "" {
			if first, dup := firstLine[key]; dup {
				l.errs = append(l.errs, l.doc.Errorf(fmt.Sprintf("$.limits[%d].name", i),
					"duplicate limit name %q (also the name of the limit at line %d)", lim.Name, first))
			} else {
				firstLine[key] = lim.Line
			}
		}
		out = append(out, lim)
	}
	return out
}

// baseSrc is where limit entry i of the limits list sits.
func (l *loader) baseSrc(i int) *entrySrc {
	return &entrySrc{base: fmt.Sprintf("$.limits[%d]", i), at: l.entryAt("$.limits", i)}
}

// entryAt returns the position of entry i of the sequence at path: its "-", or
// the entry itself.
func (l *loader) entryAt(path string, i int) place {
	if seq, ok := l.nodeAt(path).(*ast.SequenceNode); ok && i < len(seq.Values) {
		if i < len(seq.Entries) && seq.Entries[i].Start != nil && seq.Entries[i].Start.Position != nil {
			p := seq.Entries[i].Start.Position
			return place{p.Line, p.Column}
		}
	}
	line, col := l.doc.Pos(fmt.Sprintf("%s[%d]", path, i))
	return place{line, col}
}

// nodeAt returns the AST node at a YAML path made of keys and indexes
// ("$.variants[0].overrides[1].expr"), the value for a key, or nil.
func (l *loader) nodeAt(path string) ast.Node {
	rest, ok := strings.CutPrefix(path, "$")
	if !ok || l.root == nil {
		return nil
	}
	var n ast.Node = l.root
	for rest != "" {
		switch rest[0] {
		case '.':
			key := rest[1:]
			if k := strings.IndexAny(key, ".["); k >= 0 {
				key = key[:k]
			}
			rest = rest[1+len(key):]
			m := asMapping(n)
			if m == nil {
				return nil
			}
			mv := mapValue(m, key)
			if mv == nil {
				return nil
			}
			n = mv.Value
		case '[':
			end := strings.IndexByte(rest, ']')
			if end < 0 {
				return nil
			}
			i, err := strconv.Atoi(rest[1:end])
			rest = rest[end+1:]
			seq, isSeq := n.(*ast.SequenceNode)
			if err != nil || !isSeq || i < 0 || i >= len(seq.Values) {
				return nil
			}
			n = seq.Values[i]
		default:
			return nil
		}
		if n == nil {
			return nil
		}
	}
	return n
}

// limit checks and compiles the limit entry f found at s. It returns nil when the
// entry is empty.
func (l *loader) limit(s *entrySrc, f *limitForm) *Limit {
	at := s.at
	if f == nil {
		l.errs = append(l.errs, l.doc.At(at.line, at.col, "empty limit entry: expected name, description, unit, uses and expr or tolerance"))
		return nil
	}
	missing := func(key string) func() *files.Error {
		return func() *files.Error { return l.doc.At(at.line, at.col, "missing required key %q", key) }
	}
	lim := &Limit{Line: at.line, col: at.col, src: s}
	lim.Name = l.requiredAt(s.of("name"), "name", f.Name, true, missing("name"))
	lim.Description = l.requiredAt(s.of("description"), "description", f.Description, true, missing("description"))
	var unitOK bool
	if f.Unit == nil {
		l.requiredAt(s.of("unit"), "unit", nil, false, missing("unit"))
	} else {
		lim.Unit = *f.Unit
		var dim units.Dim
		var bare bool
		var scale float64
		scale, dim, bare, unitOK = l.unit(s.path("unit"), lim.Unit)
		lim.setScale(scale)
		if unitOK && f.Uses != nil {
			for j, u := range *f.Uses {
				d, known := l.cat[u]
				if known && !fits(d, dim, bare) {
					unitOK = false
					what := fmt.Sprintf("is a %s", dim)
					if bare {
						what = "is empty (a plain number, for counts, ratios and plain-number results)"
					}
					// A variant that changes only the uses is pointed at there.
					where := s.path("unit")
					if s.gives("uses") && !s.gives("unit") {
						where = fmt.Sprintf("%s[%d]", s.path("uses"), j)
					}
					l.errs = append(l.errs, l.doc.Errorf(where,
						"unit %q %s, but result %q (uses item %d) is a %s", lim.Unit, what, u, j+1, d))
				}
			}
		}
	}
	l.checkChannel(s, lim, f)
	usesOK := false
	if f.Uses == nil {
		l.requiredAt(s.of("uses"), "uses", nil, false, missing("uses"))
	} else {
		usesOK = l.uses(s.path("uses"), *f.Uses)
		lim.Uses = append([]string(nil), *f.Uses...)
	}
	hasExpr := f.Expr != nil || l.doc.Has(s.path("expr"))
	hasTol := f.Tolerance != nil || l.doc.Has(s.path("tolerance"))
	switch {
	case hasExpr && hasTol:
		l.errs = append(l.errs, l.doc.KeyErrorf(s.path("tolerance"),
			"a limit has either \"expr\" or \"tolerance\", not both: keep the expression, or the tolerance and its decision rule"))
		return lim
	case hasTol:
		l.toleranced(s, lim, f, usesOK, unitOK)
		return lim
	case f.Expr == nil:
		if l.doc.Has(s.path("expr")) {
			l.requiredAt(s.of("expr"), "expr", nil, false, missing("expr"))
		} else {
			l.errs = append(l.errs, l.doc.At(at.line, at.col,
				"missing required key \"expr\" or \"tolerance\": a limit is either an expression or a toleranced result"))
		}
		return lim
	}
	l.notForExpr(s, f)
	lim.Expr = strings.TrimSpace(*f.Expr)
	if lim.Expr == "" {
		l.errs = append(l.errs, l.doc.Errorf(s.path("expr"), "\"expr\" is empty"))
		return lim
	}
	if f.Uses != nil {
		lim.prog = l.compile(s, *f.Expr, lim.Uses, usesOK && unitOK)
	}
	return lim
}

// unit parses a limit's unit. bare is true for the empty unit, which is a plain
// number and fits counts, ratios (as fractions) and plain-number results.
func (l *loader) unit(path, u string) (scale float64, dim units.Dim, bare, ok bool) {
	if u == "" {
		return 1, units.Ratio, true, true
	}
	// A space before the unit keeps units.Parse from reading digits or an exponent
	// in the unit ("0mV", "e3V") as part of the number.
	q, err := units.Parse("1 " + u)
	if err != nil || u != strings.TrimSpace(u) || !(q.Value > 0) || math.IsInf(q.Value, 0) {
		l.errs = append(l.errs, l.doc.Errorf(path, "unknown unit %q: expected a unit such as uV, mV, V, uA, mA, ppm, %%, code, LSB or count, with no number", u))
		return 0, 0, false, false
	}
	return q.Value, q.Dim, false, true
}

// fits reports whether a result of dimension res can be shown in a unit of
// dimension unit (bare: the empty unit). A plain-number result fits only the
// empty unit: ppm or % would scale a statistic that is no fraction.
func fits(res, unit units.Dim, bare bool) bool {
	if bare {
		return res == units.Count || res == units.Ratio || res == units.Number
	}
	return res == unit
}

// uses checks the uses list: not empty, every name in the catalog, none twice.
func (l *loader) uses(path string, names []string) bool {
	if len(names) == 0 {
		l.errs = append(l.errs, l.doc.Errorf(path, "\"uses\" is empty: expected the result names the expression uses"))
		return false
	}
	ok := true
	seen := map[string]int{}
	for j, n := range names {
		p := fmt.Sprintf("%s[%d]", path, j)
		if _, known := l.cat[n]; !known || strings.Contains(n, "@") {
			l.errs = append(l.errs, l.doc.Errorf(p, "unknown result name %q (known: %s)", n, strings.Join(l.known(), ", ")))
			ok = false
		} else if k, dup := seen[n]; dup {
			l.errs = append(l.errs, l.doc.Errorf(p, "result %q is listed twice in uses (also item %d)", n, k+1))
			ok = false
		}
		seen[n] = j
	}
	return ok
}

func (l *loader) known() []string { return l.cat.names() }

// compile compiles the expression of the limit at s with only its uses in scope,
// as float64. Errors are positioned at the offending character of the expression
// in the file. check adds the checks that need a sound uses list (every listed
// name used).
func (l *loader) compile(s *entrySrc, text string, uses []string, check bool) *vm.Program {
	env := make(map[string]any, len(uses))
	for _, n := range uses {
		env[n] = float64(0)
	}
	opts := []expr.Option{expr.Env(env), expr.AsBool()}
	for _, b := range clockBuiltins {
		opts = append(opts, expr.DisableBuiltin(b))
	}
	opts = append(opts, l.funcOpts...)
	prog, err := compileSafely(text, opts)
	var st scalarText
	located := false
	errAt := func(from, line, col int, format string, args ...any) {
		if !located {
			if n := l.nodeAt(s.path("expr")); n != nil {
				st = locateScalar(l.src, n, text)
			} else {
				line, col := l.doc.Pos(s.path("expr"))
				st = scalarText{start: place{line, col}}
			}
			located = true
		}
		p := st.pos(l.src, from, line, col)
		l.errs = append(l.errs, l.doc.At(p.line, p.col, format, args...))
	}
	if err != nil {
		var fe *file.Error
		if errors.As(err, &fe) {
			msg := fe.Message
			if name, ok := strings.CutPrefix(msg, "unknown name "); ok {
				if _, known := l.cat[name]; known {
					msg = fmt.Sprintf("expression uses result %q, which is not listed in uses", name)
				} else {
					msg = fmt.Sprintf("expression uses unknown name %q: not a result listed in uses (%s) nor a function", name, strings.Join(uses, ", "))
				}
			} else {
				msg = "invalid expression: " + msg
			}
			errAt(fe.From, fe.Line, fe.Column, "%s", msg)
		} else {
			errAt(-1, 0, 0, "%s", exprMessage(err.Error()))
		}
		return nil
	}
	if !check {
		return prog
	}
	// Every listed result must be used: the judge fails a limit when any of its
	// results is invalid, so a stray name would fail it for the wrong reason.
	used := map[string]bool{}
	root := prog.Node()
	exprast.Walk(&root, walker(func(n exprast.Node) {
		switch n := n.(type) {
		case *exprast.IdentifierNode:
			used[n.Value] = true
		case *exprast.MemberNode: // $env.x, $env["x"]
			id, isID := n.Node.(*exprast.IdentifierNode)
			prop, isStr := n.Property.(*exprast.StringNode)
			if isID && isStr && id.Value == "$env" {
				used[prop.Value] = true
			}
		case *exprast.CallNode:
			id, ok := n.Callee.(*exprast.IdentifierNode)
			if ok && (id.Value == "within" || id.Value == "outside") && len(n.Arguments) == 3 {
				lo, lok := constNumber(n.Arguments[1])
				hi, hok := constNumber(n.Arguments[2])
				if lok && hok && lo > hi {
					errAt(n.Callee.Location().From, 0, 0, "%s(x, lo, hi) needs lo ≤ hi, found lo = %g above hi = %g", id.Value, lo, hi)
				}
			}
		}
	}))
	for j, n := range uses {
		if !used[n] {
			l.errs = append(l.errs, l.doc.Errorf(fmt.Sprintf("%s[%d]", s.path("uses"), j),
				"result %q is listed in uses but the expression does not use it", n))
		}
	}
	return prog
}

// yamlSafely runs a YAML parse or decode, turning a panic inside the YAML library
// (it has some on malformed input) into an error, so that no limit file can crash
// the station.
func yamlSafely(name string, f func() error) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = &files.Error{File: name, Msg: fmt.Sprintf("cannot read this file: the YAML decoder failed (%v); check tags (!...) and indentation", r)}
		}
	}()
	return f()
}

// clockBuiltins are expr-lang built-ins that read the clock or the time zone. A
// verdict must follow from the results alone, so limits cannot call them.
var clockBuiltins = []string{"now", "date", "duration", "timezone"}

// compileSafely compiles src, turning a panic inside the compiler into an error so
// that no limit file can crash the station.
func compileSafely(src string, opts []expr.Option) (p *vm.Program, err error) {
	defer func() {
		if r := recover(); r != nil {
			p, err = nil, fmt.Errorf("the expression compiler failed: %v", r)
		}
	}()
	return expr.Compile(src, opts...)
}

// exprMessage rewrites expr-lang's unpositioned messages in words.
func exprMessage(msg string) string {
	if got, ok := strings.CutPrefix(msg, "expected bool, but got "); ok {
		what := got
		switch got {
		case "int", "float64", "float", "int64":
			what = "a number"
		case "string":
			what = "text"
		}
		return fmt.Sprintf("expression must give true or false (a comparison such as x <= 60), but it gives %s", what)
	}
	return "invalid expression: " + msg
}

type walker func(exprast.Node)

func (w walker) Visit(n *exprast.Node) { w(*n) }

func constNumber(n exprast.Node) (float64, bool) {
	switch n := n.(type) {
	case *exprast.IntegerNode:
		return float64(n.Value), true
	case *exprast.FloatNode:
		return n.Value, true
	case *exprast.UnaryNode:
		v, ok := constNumber(n.Node)
		switch {
		case ok && n.Operator == "-":
			return -v, true
		case ok && n.Operator == "+":
			return v, true
		}
	}
	return 0, false
}

func (l *loader) sorted() files.List {
	type key struct {
		line, col int
		msg       string
	}
	seen := map[key]bool{}
	out := make(files.List, 0, len(l.errs))
	for _, e := range l.errs {
		k := key{e.Line, e.Col, e.Msg}
		if seen[k] {
			continue
		}
		seen[k] = true
		out = append(out, e)
	}
	out.Sort()
	return out
}

func asList(name string, err error) files.List {
	if fe := files.Errs(err); fe != nil {
		return files.List(fe)
	}
	return files.List{{File: name, Msg: err.Error()}}
}

func splitRunes(data []byte) [][]rune {
	lines := strings.Split(string(data), "\n")
	out := make([][]rune, len(lines))
	for i, s := range lines {
		out[i] = []rune(s)
	}
	return out
}

func asMapping(n ast.Node) *ast.MappingNode {
	switch n := n.(type) {
	case *ast.MappingNode:
		return n
	case *ast.MappingValueNode:
		return &ast.MappingNode{BaseNode: &ast.BaseNode{}, Values: []*ast.MappingValueNode{n}}
	}
	return nil
}

func mapValue(m *ast.MappingNode, key string) *ast.MappingValueNode {
	for _, mv := range m.Values {
		if mv.Key != nil {
			if tk := mv.Key.GetToken(); tk != nil && tk.Value == key {
				return mv
			}
		}
	}
	return nil
}
