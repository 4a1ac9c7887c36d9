package budget

import (
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/goccy/go-yaml/ast"

	"trimline/instruments/files"
	"trimline/instruments/numfmt"
	"trimline/instruments/units"
)

// MaxDACBits is the widest trim DAC a budget may describe (as a sequence's dacs:).
const MaxDACBits = 24

// MaxPoints bounds transfer.points: each trial of a Monte Carlo evaluates the
// unit's output at every point.
const MaxPoints = 1000

// MaxSources bounds the sources of one budget (each adds to the correlation
// matrix factored at load).
const MaxSources = 200

// Load reads and checks the budget file at path. Every problem comes back at once
// in a files.List, each with file:line:col and an excerpt.
func Load(path string) (*Budget, error) {
	data, err := files.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return Parse(path, data)
}

// Parse is Load on bytes already read; name is used in messages and to resolve
// the limit file.
func Parse(name string, data []byte) (*Budget, error) {
	doc, err := files.Parse(name, data)
	if err != nil {
		return nil, err
	}
	var f budgetFile
	var dec files.List
	if err := doc.DecodeAll(&f); err != nil {
		if dec = files.Errs(err); dec == nil {
			dec = files.List{{File: name, Msg: err.Error()}}
		}
	}
	p := &parser{doc: doc, decodedOK: len(dec) == 0}
	b := p.budget(&f)
	errs := withDecodeErrs(dec, p.errs)
	if len(errs) > 0 {
		errs.Sort()
		return nil, errs
	}
	b.Path = name
	return b, nil
}

// qty is a value as written, kept with its position so that it is parsed once its
// dimension is known.
type qty struct {
	text      string
	line, col int
}

// UnmarshalYAML keeps the text of a scalar; a mapping or a list is an error at it.
func (q *qty) UnmarshalYAML(n ast.Node) error {
	tk := n.GetToken()
	if tk != nil && tk.Position != nil {
		q.line, q.col = tk.Position.Line, tk.Position.Column
	}
	switch v := n.(type) {
	case *ast.StringNode:
		q.text = v.Value
	case *ast.IntegerNode, *ast.FloatNode:
		q.text = tk.Value
	default:
		return &units.NodeError{Line: q.line, Col: q.col, Msg: "expected a quantity such as 10 uV, ±0.1 % or 140 dB"}
	}
	return nil
}

type budgetFile struct {
	Budget struct {
		Product     string    `yaml:"product"`
		Revision    string    `yaml:"revision"`
		Limits      string    `yaml:"limits"`
		Temperature *tempDecl `yaml:"temperature"`
	} `yaml:"budget"`
	Transfer struct {
		Gain         *qty `yaml:"gain"`
		OutputAtZero *qty `yaml:"output_at_zero"`
		Input        *struct {
			Low  *qty `yaml:"low"`
			High *qty `yaml:"high"`
		} `yaml:"input"`
		Points *int `yaml:"points"`
		Rails  *struct {
			Low  *qty `yaml:"low"`
			High *qty `yaml:"high"`
			Knee *qty `yaml:"knee"`
		} `yaml:"rails"`
	} `yaml:"transfer"`
	Sources      []*sourceDecl `yaml:"sources"`
	Correlations []*struct {
		Between     []string `yaml:"between"`
		Coefficient *qty     `yaml:"coefficient"`
	} `yaml:"correlations"`
	Trim struct {
		DACs         []*dacDecl  `yaml:"dacs"`
		Coefficients []*coefDecl `yaml:"coefficients"`
	} `yaml:"trim"`
}

type tempDecl struct {
	Low       *qty `yaml:"low"`
	High      *qty `yaml:"high"`
	Reference *qty `yaml:"reference"`
}

type sourceDecl struct {
	Name       string `yaml:"name"`
	Acts       string `yaml:"acts"`
	Mean       *qty   `yaml:"mean"`
	At         *qty   `yaml:"at"`
	Normal     *qty   `yaml:"normal"`
	Uniform    *qty   `yaml:"uniform"`
	Triangular *qty   `yaml:"triangular"`
	Arcsine    *qty   `yaml:"arcsine"`
	Tolerance  *qty   `yaml:"tolerance"`
	Drift      *qty   `yaml:"drift"`
	Ratio      *struct {
		R1          *resistorDecl `yaml:"r1"`
		R2          *resistorDecl `yaml:"r2"`
		Correlation *qty          `yaml:"correlation"`
	} `yaml:"ratio"`
	OpenLoop *struct {
		Gain *qty `yaml:"gain"`
		Low  *qty `yaml:"low"`
		High *qty `yaml:"high"`
	} `yaml:"open_loop"`
}

type resistorDecl struct {
	Value     *qty `yaml:"value"`
	Tolerance *qty `yaml:"tolerance"`
}

type dacDecl struct {
	Name         string `yaml:"name"`
	Adjusts      string `yaml:"adjusts"`
	Bits         *int   `yaml:"bits"`
	LSB          *qty   `yaml:"lsb"`
	NoCorrection *int   `yaml:"no_correction"`
	Placement    string `yaml:"placement"`
	DNL          *qty   `yaml:"dnl"`
	Coding       string `yaml:"coding"`
}

type coefDecl struct {
	Name    string `yaml:"name"`
	Adjusts string `yaml:"adjusts"`
	Format  string `yaml:"format"`
	Unit    string `yaml:"unit"`
}

// distKeys are the keys that give a source its distribution, exactly one per source.
var distKeys = []string{"normal", "uniform", "triangular", "arcsine", "tolerance", "drift", "ratio", "open_loop"}

// parser collects the problems of one file.
type parser struct {
	doc       *files.Doc
	errs      files.List
	decodedOK bool // every value decoded (a value that did not is zero)
}

// bad records a problem at path: at the value there (a mapping at its first
// key), or, when nothing is there, where the missing key belongs.
func (p *parser) bad(path, format string, args ...any) {
	if p.doc.Has(path) {
		line, col := p.doc.StartPos(path)
		p.errs = append(p.errs, p.doc.At(line, col, format, args...))
		return
	}
	p.errs = append(p.errs, p.doc.Errorf(path, format, args...))
}

// missing records a missing key at path, placed at the start of the mapping
// that lacks it.
func (p *parser) missing(path, format string, args ...any) {
	if i := strings.LastIndex(path, "."); i > 0 && p.doc.Has(path[:i]) {
		line, col := p.doc.StartPos(path[:i])
		p.errs = append(p.errs, p.doc.At(line, col, format, args...))
		return
	}
	p.errs = append(p.errs, p.doc.Errorf(path, format, args...))
}

func (p *parser) badAt(q *qty, format string, args ...any) {
	p.errs = append(p.errs, p.doc.At(q.line, q.col, format, args...))
}

// value parses q as a quantity of dimension want; ok is false (and the problem
// recorded) when it is not one. A nil q is a missing key at path.
func (p *parser) value(path string, q *qty, want units.Dim) (float64, bool) {
	if q == nil {
		p.missing(path, "missing required key %q", lastKey(path))
		return 0, false
	}
	v, err := units.ParseAs(q.text, want)
	if err != nil {
		p.badAt(q, "%v", err)
		return 0, false
	}
	return v, true
}

// anyOf parses q as a quantity of one of the dimensions in want.
func (p *parser) anyOf(path string, q *qty, want ...units.Dim) (units.Quantity, bool) {
	if q == nil {
		p.missing(path, "missing required key %q", lastKey(path))
		return units.Quantity{}, false
	}
	v, err := units.Parse(q.text)
	if err != nil {
		p.badAt(q, "%v", err)
		return units.Quantity{}, false
	}
	for _, d := range want {
		if v.Dim == d {
			return v, true
		}
	}
	names := make([]string, len(want))
	for i, d := range want {
		names[i] = d.String()
	}
	p.badAt(q, "%q is a %s: expected a %s", q.text, v.Dim, strings.Join(names, " or a "))
	return units.Quantity{}, false
}

// halfWidth parses "±a" (the ± may be left out) as a half-width of dimension
// want; a ratio needs its unit (ppm or %).
func (p *parser) halfWidth(q *qty, want units.Dim) (float64, bool) {
	t, _ := cutPM(q.text)
	v, err := parseDim(t, want)
	if err != nil {
		p.badAt(q, "%v", err)
		return 0, false
	}
	if v < 0 {
		p.badAt(q, "expected a half-width of at least 0, written ±a (e.g. ±2 mV), found %q", q.text)
		return 0, false
	}
	return v, true
}

// cutPM removes a leading ± (or +/-) and reports whether there was one.
func cutPM(s string) (string, bool) {
	t := strings.TrimSpace(s)
	for _, pm := range []string{"±", "+/-", "+-"} {
		if r, ok := strings.CutPrefix(t, pm); ok {
			return strings.TrimSpace(r), true
		}
	}
	return t, false
}

// parseDim parses s as a quantity of dimension d; a ratio must carry ppm, ppb or %.
func parseDim(s string, d units.Dim) (float64, error) {
	if d == units.Ratio {
		return units.ParseRatio(s)
	}
	return units.ParseAs(s, d)
}

func lastKey(path string) string {
	i := strings.LastIndexAny(path, ".")
	return path[i+1:]
}

func (p *parser) budget(f *budgetFile) *Budget {
	b := &Budget{Product: f.Budget.Product, Revision: f.Budget.Revision}
	if !p.doc.Has("$.budget") {
		p.bad("$", "missing required key \"budget\" (product, revision, limits)")
	} else if strings.TrimSpace(b.Product) == "" {
		p.bad("$.budget.product", "missing required key \"product\"")
	}
	if f.Budget.Limits != "" {
		b.LimitsFile = f.Budget.Limits
		if !filepath.IsAbs(b.LimitsFile) {
			b.LimitsFile = filepath.Join(filepath.Dir(p.doc.Name), b.LimitsFile)
		}
	}
	n := len(p.errs)
	if t := f.Budget.Temperature; t != nil {
		b.Temperature = p.temperature(t)
	}
	p.transfer(f, b)
	p.sources(f, b)
	p.correlations(f, b)
	// The correlations can be drawn together only when every source they need
	// has loaded; a mistake elsewhere (a DAC, the product) does not stop the check.
	drawable := len(p.errs) == n && p.decodedOK
	p.trim(f, b)
	if drawable {
		lm, err := newLatent(b)
		if ce, ok := err.(*correlationError); ok {
			path := "$.correlations"
			if ce.Index >= 0 {
				path = fmt.Sprintf("$.correlations[%d].coefficient", ce.Index)
			}
			p.bad(path, "%s", ce.Msg)
		}
		b.latent = lm
	}
	return b
}

func (p *parser) temperature(t *tempDecl) *TempRange {
	const base = "$.budget.temperature"
	lo, ok1 := p.value(base+".low", t.Low, units.Celsius)
	hi, ok2 := p.value(base+".high", t.High, units.Celsius)
	ref, ok3 := p.value(base+".reference", t.Reference, units.Celsius)
	if ok1 && ok2 && !(hi > lo) {
		p.bad(base+".high", "expected high above low (%g °C)", lo)
	}
	if !(ok1 && ok2 && ok3) {
		return nil
	}
	return &TempRange{Low: lo, High: hi, Reference: ref}
}

func (p *parser) transfer(f *budgetFile, b *Budget) {
	const base = "$.transfer"
	if !p.doc.Has(base) {
		p.bad("$", "missing required key \"transfer\" (gain, output_at_zero, input)")
		return
	}
	t := &b.Transfer
	t.InputUnit, t.OutputUnit = "V", "V"
	outDim := units.Volt
	if q := f.Transfer.OutputAtZero; q == nil {
		p.bad(base+".output_at_zero", "missing required key \"output_at_zero\" (e.g. 2.5 V)")
	} else if v, ok := p.anyOf(base+".output_at_zero", q, units.Volt, units.Ampere); ok {
		t.OutputAtZero, outDim = v.Value, v.Dim
		t.OutputUnit = unitName(v.Dim)
	}
	inDim := units.Volt
	if in := f.Transfer.Input; in == nil {
		p.bad(base+".input", "missing required key \"input\" ({low: -10 mV, high: 10 mV})")
	} else {
		lo, ok1 := p.anyOf(base+".input.low", in.Low, units.Volt, units.Ampere)
		hi, ok2 := p.anyOf(base+".input.high", in.High, units.Volt, units.Ampere)
		switch {
		case ok1 && ok2 && lo.Dim != hi.Dim:
			p.bad(base+".input.high", "expected a %s as low is, found a %s", lo.Dim, hi.Dim)
		case ok1 && ok2 && !(hi.Value > lo.Value):
			p.bad(base+".input.high", "expected high above low")
		case ok1 && ok2:
			t.InputLow, t.InputHigh, inDim = lo.Value, hi.Value, lo.Dim
			t.InputUnit = unitName(inDim)
		}
	}
	if q := f.Transfer.Gain; q == nil {
		p.bad(base+".gain", "missing required key \"gain\" (e.g. 200, or 200 V/V)")
	} else if g, err := units.ParseRatioUnit(q.text); err != nil {
		p.badAt(q, "%v", err)
	} else if g.Num != g.Den && (g.Num != outDim || g.Den != inDim) {
		p.badAt(q, "expected a gain in %s/%s or a plain number, found %q", unitName(outDim), unitName(inDim), q.text)
	} else if g.Value == 0 {
		p.badAt(q, "expected a gain other than 0")
	} else {
		t.Gain = g.Value
	}
	t.Points = 11
	if f.Transfer.Points != nil {
		if t.Points = *f.Transfer.Points; t.Points < 2 || t.Points > MaxPoints {
			p.bad(base+".points", "expected 2 to %d sweep points, found %d", MaxPoints, t.Points)
			t.Points = 11
		}
	}
	if r := f.Transfer.Rails; r != nil {
		lo, ok1 := p.value(base+".rails.low", r.Low, outDim)
		hi, ok2 := p.value(base+".rails.high", r.High, outDim)
		knee, ok3 := p.value(base+".rails.knee", r.Knee, outDim)
		switch {
		case ok1 && ok2 && !(hi > lo):
			p.bad(base+".rails.high", "expected the high rail above the low one")
		case ok3 && knee < 0:
			p.bad(base+".rails.knee", "expected a knee of at least 0")
		case ok1 && ok2 && ok3 && 2*knee > hi-lo:
			p.bad(base+".rails.knee", "expected a knee at most half the distance between the rails")
		case ok1 && ok2 && ok3:
			t.Rails = &Rails{Low: lo, High: hi, Knee: knee}
		}
	}
}

func unitName(d units.Dim) string {
	if d == units.Ampere {
		return "A"
	}
	return "V"
}

func dimOf(unit string) units.Dim {
	if unit == "A" {
		return units.Ampere
	}
	return units.Volt
}

func (p *parser) sources(f *budgetFile, b *Budget) {
	if !p.doc.Has("$.sources") {
		p.bad("$", "missing required key \"sources\" (the sources of error, each with name, acts and a distribution)")
		return
	}
	if len(f.Sources) > MaxSources {
		p.bad("$.sources", "expected at most %d sources, found %d", MaxSources, len(f.Sources))
		return
	}
	seen := map[string]int{}
	crossAt, crossFrom := math.NaN(), -1
	for i, d := range f.Sources {
		path := fmt.Sprintf("$.sources[%d]", i)
		if d == nil {
			p.bad(path, "expected a source: name, acts and one of %s", strings.Join(distKeys, ", "))
			continue
		}
		s, ok := p.source(path, d, b)
		if d.Name != "" {
			if j, dup := seen[d.Name]; dup {
				p.bad(path+".name", "source name %q is already used by sources[%d]", d.Name, j)
			}
			seen[d.Name] = i
		}
		if ok && s.Acts == ActsCrossoverStep {
			if crossFrom >= 0 && s.At != crossAt {
				p.bad(path+".at", "every crossover step acts at one input level: sources[%d] has at %g %s", crossFrom, crossAt, b.Transfer.InputUnit)
			}
			crossAt, crossFrom = s.At, i
		}
		b.Sources = append(b.Sources, s)
	}
}

// source checks one source; ok is false when it has a problem.
func (p *parser) source(path string, d *sourceDecl, b *Budget) (Source, bool) {
	n := len(p.errs)
	s := Source{Name: d.Name, Acts: d.Acts}
	s.Line, s.Col = p.doc.StartPos(path)
	if strings.TrimSpace(d.Name) == "" {
		p.bad(path, "missing required key \"name\"")
	}
	inDim, outDim := dimOf(b.Transfer.InputUnit), dimOf(b.Transfer.OutputUnit)
	var dim units.Dim
	switch d.Acts {
	case ActsInputOffset, ActsCrossoverStep:
		dim = inDim
	case ActsOutputOffset:
		dim = outDim
	case ActsGain, ActsRailCompression:
		dim = units.Ratio
	case "":
		p.bad(path, "missing required key \"acts\" (one of %s)", actsText)
		return s, false
	default:
		p.bad(path+".acts", "expected one of %s, found %q", actsText, d.Acts)
		return s, false
	}
	if d.Acts == ActsCrossoverStep {
		if at, ok := p.value(path+".at", d.At, inDim); ok {
			s.At = at
		}
	} else if d.At != nil {
		p.badAt(d.At, "at applies to a crossover_step source only")
	}
	if d.Acts == ActsRailCompression && !p.doc.Has("$.transfer.rails") && p.doc.Has("$.transfer") {
		p.bad(path+".acts", "rail_compression needs transfer.rails (low, high, knee)")
	}
	var keys []string
	for _, k := range distKeys {
		if p.doc.Has(path + "." + k) {
			keys = append(keys, k)
		}
	}
	switch len(keys) {
	case 0:
		p.bad(path, "source %q has no distribution: give one of %s", d.Name, strings.Join(distKeys, ", "))
		return s, false
	case 1:
	default:
		p.errs = append(p.errs, p.doc.KeyErrorf(path+"."+keys[1], "source %q has two distributions (%s and %s): give exactly one", d.Name, keys[0], keys[1]))
		return s, false
	}
	var mean float64
	if d.Mean != nil {
		if keys[0] == "drift" || keys[0] == "ratio" || keys[0] == "open_loop" {
			p.badAt(d.Mean, "mean applies to normal, uniform, triangular, arcsine and tolerance sources only")
		} else if v, err := parseDim(d.Mean.text, dim); err != nil {
			p.badAt(d.Mean, "%v", err)
		} else {
			mean = v
		}
	}
	plain := func(kind string, q *qty, perSigma float64) {
		if q == nil {
			p.bad(path+"."+keys[0], "expected a value such as ±2 mV")
			return
		}
		a, ok := p.halfWidth(q, dim)
		if !ok {
			return
		}
		s.Dist = Dist{Kind: kind, Mean: mean, HalfWidth: a, Sigma: a / math.Sqrt(perSigma)}
		s.Low, s.High = mean-a, mean+a
	}
	switch keys[0] {
	case "normal":
		if d.Normal == nil {
			p.bad(path+".normal", "expected a standard deviation such as 10 uV")
			break
		}
		if _, pm := cutPM(d.Normal.text); pm {
			p.badAt(d.Normal, "a normal source takes its standard deviation σ without ± (e.g. normal: 10 uV)")
			break
		}
		sd, err := parseDim(d.Normal.text, dim)
		if err != nil {
			p.badAt(d.Normal, "%v", err)
			break
		}
		if sd < 0 {
			p.badAt(d.Normal, "expected a standard deviation of at least 0")
			break
		}
		s.Dist = Dist{Kind: KindNormal, Mean: mean, Sigma: sd}
		s.Low, s.High = mean-3*sd, mean+3*sd
	case "uniform":
		plain(KindUniform, d.Uniform, 3)
	case "tolerance":
		plain(KindUniform, d.Tolerance, 3)
	case "triangular":
		plain(KindTriangular, d.Triangular, 6)
	case "arcsine":
		plain(KindArcsine, d.Arcsine, 2)
	case "drift":
		p.drift(path, d, dim, b, &s)
	case "ratio":
		p.ratio(path, d, &s)
	case "open_loop":
		p.openLoop(path, d, b, &s)
	}
	return s, len(p.errs) == n
}

var actsText = strings.Join([]string{ActsInputOffset, ActsOutputOffset, ActsGain, ActsCrossoverStep, ActsRailCompression}, ", ")

func (p *parser) drift(path string, d *sourceDecl, dim units.Dim, b *Budget, s *Source) {
	q := d.Drift
	if q == nil {
		p.bad(path+".drift", "expected a coefficient such as ±2 uV/°C")
		return
	}
	t, _ := cutPM(q.text)
	c, err := units.ParseRatioUnit(t)
	switch {
	case err != nil:
		p.badAt(q, "%v", err)
		return
	case c.Den != units.Celsius:
		p.badAt(q, "expected a coefficient per °C such as ±2 uV/°C or ±25 ppm/°C, found %q", q.text)
		return
	case c.Num != dim:
		p.badAt(q, "a %s source drifts by a %s per °C, found %q", s.Acts, dim, q.text)
		return
	case c.Value < 0:
		p.badAt(q, "expected a coefficient's half-width of at least 0, written ±a (e.g. ±2 uV/°C)")
		return
	}
	if b.Temperature == nil {
		if !p.doc.Has("$.budget.temperature") {
			p.bad(path+".drift", "a drift needs the operating range: budget.temperature {low, high, reference}")
		}
		return
	}
	tr := *b.Temperature
	m := (tr.Low+tr.High)/2 - tr.Reference
	w := tr.High - tr.Low
	s.Drift = &Drift{Coefficient: c.Value, Temp: tr}
	reach := c.Value * math.Max(math.Abs(tr.Low-tr.Reference), math.Abs(tr.High-tr.Reference))
	s.Dist = Dist{Kind: KindDrift, HalfWidth: reach, Sigma: c.Value / math.Sqrt(3) * math.Sqrt(m*m+w*w/12)}
	s.Low, s.High = -reach, reach
}

func (p *parser) ratio(path string, d *sourceDecl, s *Source) {
	r := d.Ratio
	if r == nil {
		p.bad(path+".ratio", "expected r1 and r2, each {value, tolerance}, and an optional correlation")
		return
	}
	if s.Acts != ActsGain {
		p.bad(path+".acts", "a ratio gives a gain error: expected acts: gain, found %q", s.Acts)
	}
	res := func(key string, rd *resistorDecl) (Resistor, bool) {
		rp := path + ".ratio." + key
		if rd == nil {
			p.bad(rp, "missing required key %q ({value: 1 kohm, tolerance: ±0.1 %%})", key)
			return Resistor{}, false
		}
		v, ok1 := p.value(rp+".value", rd.Value, units.Ohm)
		if ok1 && !(v > 0) {
			p.badAt(rd.Value, "expected a resistance above 0")
			ok1 = false
		}
		if rd.Tolerance == nil {
			p.bad(rp+".tolerance", "missing required key \"tolerance\" (e.g. ±0.1 %%)")
			return Resistor{}, false
		}
		tol, ok2 := p.halfWidth(rd.Tolerance, units.Ratio)
		if ok2 && tol >= 1 {
			p.badAt(rd.Tolerance, "expected a tolerance below 100 %%")
			ok2 = false
		}
		return Resistor{Value: v, Tolerance: tol}, ok1 && ok2
	}
	r1, ok1 := res("r1", r.R1)
	r2, ok2 := res("r2", r.R2)
	var rho float64
	ok3 := true
	if r.Correlation != nil {
		rho, ok3 = p.coefficient(r.Correlation)
	}
	if !(ok1 && ok2 && ok3) {
		return
	}
	ra := &Ratio{R1: r1, R2: r2, Correlation: rho}
	s.Ratio = ra
	k := r2.Value / r1.Value
	g0 := 1 + k
	// First order: g ≈ k/(1+k)·(e2 − e1), e rectangular: u = a/√3.
	u1, u2 := r1.Tolerance/math.Sqrt(3), r2.Tolerance/math.Sqrt(3)
	sd := k / g0 * math.Sqrt(math.Max(0, u1*u1+u2*u2-2*rho*u1*u2))
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, e1 := range []float64{-r1.Tolerance, r1.Tolerance} {
		for _, e2 := range []float64{-r2.Tolerance, r2.Tolerance} {
			g := ra.gain(e1, e2)
			lo, hi = math.Min(lo, g), math.Max(hi, g)
		}
	}
	s.Dist = Dist{Kind: KindRatio, HalfWidth: (hi - lo) / 2, Sigma: sd}
	s.Low, s.High = lo, hi
}

// gain is the relative gain error of the ratio with relative resistor errors e1, e2.
func (r *Ratio) gain(e1, e2 float64) float64 {
	k := r.R2.Value / r.R1.Value
	return (1+k*(1+e2)/(1+e1))/(1+k) - 1
}

func (p *parser) openLoop(path string, d *sourceDecl, b *Budget, s *Source) {
	o := d.OpenLoop
	if o == nil {
		p.bad(path+".open_loop", "expected {gain: 140 dB} or {low: 120 dB, high: 140 dB}")
		return
	}
	if s.Acts != ActsGain {
		p.bad(path+".acts", "a finite open-loop gain gives a gain error: expected acts: gain, found %q", s.Acts)
	}
	var lo, hi float64
	switch {
	case o.Gain != nil && (o.Low != nil || o.High != nil):
		p.bad(path+".open_loop.gain", "give either gain or low and high, not both")
		return
	case o.Gain != nil:
		a, ok := p.loopGain(o.Gain)
		if !ok {
			return
		}
		lo, hi = a, a
	case o.Low != nil && o.High != nil:
		a, ok1 := p.loopGain(o.Low)
		c, ok2 := p.loopGain(o.High)
		if !(ok1 && ok2) {
			return
		}
		if !(c > a) {
			p.badAt(o.High, "expected high above low")
			return
		}
		lo, hi = a, c
	default:
		p.bad(path+".open_loop", "expected {gain: 140 dB} or {low: 120 dB, high: 140 dB}")
		return
	}
	g := math.Abs(b.Transfer.Gain)
	if g == 0 {
		return // the transfer's gain has its own problem
	}
	s.OpenLoop = &OpenLoop{Low: lo, High: hi, Beta: 1 / g}
	at := func(a float64) float64 { return -1 / (1 + a/g) }
	s.Low, s.High = at(lo), at(hi)
	mean, sd := at(lo), 0.0
	if hi > lo {
		mean, sd = momentsOf(func(z float64) float64 { return at(s.OpenLoop.gainAt(z)) })
	}
	s.Dist = Dist{Kind: KindOpenLoop, Mean: mean, HalfWidth: (s.High - s.Low) / 2, Sigma: sd}
}

// gainAt is the open-loop gain (V/V) at normal score z: uniform in decibels.
func (o *OpenLoop) gainAt(z float64) float64 {
	if o.High == o.Low {
		return o.Low
	}
	lo, hi := 20*math.Log10(o.Low), 20*math.Log10(o.High)
	return math.Pow(10, (lo+(hi-lo)*phi(z))/20)
}

// loopGain parses an open-loop gain: "140 dB", or V/V as a plain number or "1e7 V/V".
func (p *parser) loopGain(q *qty) (float64, bool) {
	t := strings.TrimSpace(q.text)
	var a float64
	if num, ok := strings.CutSuffix(t, "dB"); ok {
		db, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
		if err != nil || math.IsNaN(db) || math.IsInf(db, 0) || db > 600 {
			p.badAt(q, "expected a gain in decibels such as 140 dB, found %q", q.text)
			return 0, false
		}
		a = math.Pow(10, db/20)
	} else {
		g, err := units.ParseRatioUnit(t)
		if err != nil || g.Num != g.Den {
			p.badAt(q, "expected an open-loop gain such as 140 dB or 1e7 V/V, found %q", q.text)
			return 0, false
		}
		a = g.Value
	}
	if !(a > 0) {
		p.badAt(q, "expected an open-loop gain above 0, found %q", q.text)
		return 0, false
	}
	return a, true
}

// coefficient parses a correlation coefficient in −1…1 (a plain number or %).
func (p *parser) coefficient(q *qty) (float64, bool) {
	v, err := units.Parse(q.text)
	if err != nil || v.Dim != units.Ratio {
		p.badAt(q, "expected a correlation coefficient from -1 to 1, found %q", q.text)
		return 0, false
	}
	if v.Value < -1 || v.Value > 1 {
		p.badAt(q, "expected a correlation coefficient from -1 to 1, found %q", q.text)
		return 0, false
	}
	return v.Value, true
}

func (p *parser) correlations(f *budgetFile, b *Budget) {
	index := map[string]int{}
	for i, s := range b.Sources {
		if _, dup := index[s.Name]; !dup && s.Name != "" {
			index[s.Name] = i
		}
	}
	seen := map[[2]int]int{}
	for i, c := range f.Correlations {
		path := fmt.Sprintf("$.correlations[%d]", i)
		if c == nil {
			p.bad(path, "expected a correlation: between [source, source] and coefficient")
			continue
		}
		if len(c.Between) != 2 {
			if !p.doc.Has(path + ".between") {
				p.bad(path, "missing required key \"between\" (two source names)")
			} else {
				p.bad(path+".between", "expected two source names, found %d", len(c.Between))
			}
			continue
		}
		var ends [2]int
		ok := true
		for k, name := range c.Between {
			j, known := index[name]
			if !known {
				p.bad(fmt.Sprintf("%s.between[%d]", path, k), "no source is named %q", name)
				ok = false
				continue
			}
			switch b.Sources[j].Dist.Kind {
			case KindDrift, KindRatio:
				p.bad(fmt.Sprintf("%s.between[%d]", path, k), "source %q is a %s, made of two quantities: only a source of one distribution (or an open_loop range) may be correlated", name, b.Sources[j].Dist.Kind)
				ok = false
			case KindOpenLoop:
				if o := b.Sources[j].OpenLoop; o != nil && o.High == o.Low {
					p.bad(fmt.Sprintf("%s.between[%d]", path, k), "source %q has a fixed open-loop gain: nothing to correlate", name)
					ok = false
				}
			}
			ends[k] = j
		}
		if c.Coefficient == nil {
			p.bad(path, "missing required key \"coefficient\" (from -1 to 1)")
			continue
		}
		rho, okc := p.coefficient(c.Coefficient)
		if !ok || !okc {
			continue
		}
		if ends[0] == ends[1] {
			p.bad(path+".between", "a source is correlated with itself")
			continue
		}
		key := [2]int{min(ends[0], ends[1]), max(ends[0], ends[1])}
		if j, dup := seen[key]; dup {
			p.bad(path+".between", "these two sources are already correlated by correlations[%d]", j)
			continue
		}
		seen[key] = i
		b.Correlations = append(b.Correlations, Correlation{A: ends[0], B: ends[1], Coefficient: rho})
	}
}

func (p *parser) trim(f *budgetFile, b *Budget) {
	if !p.doc.Has("$.trim") {
		return
	}
	inDim, outDim := dimOf(b.Transfer.InputUnit), dimOf(b.Transfer.OutputUnit)
	seen := map[string]int{}
	for i, d := range f.Trim.DACs {
		path := fmt.Sprintf("$.trim.dacs[%d]", i)
		if d == nil {
			p.bad(path, "expected a trim DAC: name, adjusts, bits, lsb, no_correction")
			continue
		}
		out := DAC{Name: d.Name, Adjusts: d.Adjusts, Placement: d.Placement}
		if d.Name == "" {
			p.bad(path, "missing required key \"name\"")
		} else if j, dup := seen[d.Name]; dup {
			p.bad(path+".name", "DAC name %q is already used by dacs[%d]", d.Name, j)
		} else {
			seen[d.Name] = i
		}
		dim := units.Ratio
		switch d.Adjusts {
		case "gain":
			if d.Placement != "" {
				p.bad(path+".placement", "placement applies to offset DACs only")
			}
		case "offset":
			switch d.Placement {
			case "", "after_gain":
				out.Placement, dim = "after_gain", outDim
			case "before_gain":
				dim = inDim
			default:
				p.bad(path+".placement", "expected after_gain or before_gain, found %q", d.Placement)
				dim = outDim // the LSB read as after the gain, so that one mistake is told once
			}
		case "":
			p.bad(path, "missing required key \"adjusts\" (gain or offset)")
		default:
			p.bad(path+".adjusts", "expected gain or offset, found %q", d.Adjusts)
		}
		switch {
		case d.Bits == nil:
			p.bad(path, "missing required key \"bits\"")
		case *d.Bits < 1 || *d.Bits > MaxDACBits:
			p.bad(path+".bits", "expected 1 to %d bits, found %d", MaxDACBits, *d.Bits)
		default:
			out.Bits = *d.Bits
		}
		if d.LSB == nil {
			p.bad(path, "missing required key \"lsb\"")
		} else if v, err := parseDim(d.LSB.text, dim); err != nil {
			p.badAt(d.LSB, "%v", err)
		} else if !(v > 0) {
			p.badAt(d.LSB, "expected a positive LSB size")
		} else {
			out.LSB = v
		}
		switch d.Coding {
		case "", "binary_offset", "offset_binary":
		case "twos_complement":
			out.TwosComplement = true
		default:
			p.bad(path+".coding", "expected binary_offset or twos_complement, found %q", d.Coding)
		}
		switch {
		case d.NoCorrection == nil && out.TwosComplement:
			out.NoCorrection = 0 // a signed code: 0 is no correction
		case d.NoCorrection == nil:
			p.bad(path, "missing required key \"no_correction\" (the code that applies no correction, often mid-scale)")
		case out.Bits > 0 && (*d.NoCorrection < out.MinCode() || *d.NoCorrection > out.MaxCode()):
			p.bad(path+".no_correction", "expected a code in %d..%d", out.MinCode(), out.MaxCode())
		default:
			out.NoCorrection = *d.NoCorrection
		}
		if d.DNL != nil {
			if v, err := units.ParseAs(d.DNL.text, units.Count); err != nil {
				p.badAt(d.DNL, "%v (write it in LSB, e.g. 0.3 LSB)", err)
			} else if v < 0 {
				p.badAt(d.DNL, "expected a DNL of at least 0 LSB")
			} else {
				out.DNL = v
			}
		}
		b.Trim.DACs = append(b.Trim.DACs, out)
	}
	if p.doc.Has("$.trim.coefficients.format") {
		p.bad("$.trim.coefficients.format", "expected a list of coefficients as a sequence writes them, each with its own format (- {name: gain, adjusts: gain, format: Q2.14}; - {name: offset, adjusts: offset, format: Q4.12, unit: mA}): a format for both (fixed with fraction_bits) is no longer read")
	}
	p.coefficients(f.Trim.Coefficients, outDim, b)
	if len(f.Trim.DACs) == 0 && len(f.Trim.Coefficients) == 0 && !p.doc.Has("$.trim.coefficients.format") {
		p.bad("$.trim", "expected dacs or coefficients: the trim design to evaluate")
	}
}

// coefficients checks trim.coefficients: a list as a sequence's coefficients:
// writes it (name, adjusts gain or offset, format Q<m>.<n> or float32, unit for
// an offset), at most one per adjustment. outDim is the output's dimension, an
// offset's unit's.
func (p *parser) coefficients(cs []*coefDecl, outDim units.Dim, b *Budget) {
	names, adjusts := map[string]int{}, map[string]int{}
	for i, d := range cs {
		path := fmt.Sprintf("$.trim.coefficients[%d]", i)
		if d == nil {
			p.bad(path, "expected a coefficient: name, adjusts, format")
			continue
		}
		c := Coefficient{Name: d.Name, Adjusts: d.Adjusts, FormatName: d.Format, UnitSI: 1}
		if j, dup := names[d.Name]; d.Name == "" {
			p.bad(path, "missing required key \"name\"")
		} else if dup {
			p.bad(path+".name", "coefficient name %q is already used by coefficients[%d]", d.Name, j)
		} else {
			names[d.Name] = i
		}
		switch d.Adjusts {
		case "gain", "offset":
			if j, dup := adjusts[d.Adjusts]; dup {
				p.bad(path+".adjusts", "coefficients[%d] adjusts %s already", j, d.Adjusts)
			}
			adjusts[d.Adjusts] = i
		case "":
			p.bad(path, "missing required key \"adjusts\" (gain or offset)")
		default:
			p.bad(path+".adjusts", "expected gain or offset, found %q", d.Adjusts)
		}
		switch {
		case d.Unit == "":
		case d.Adjusts == "gain":
			p.bad(path+".unit", "unit applies to offset coefficients only: a gain is a plain factor (no correction = 1)")
		default:
			text := d.Unit
			if strings.IndexFunc(text, func(r rune) bool { return r >= '0' && r <= '9' }) < 0 {
				text = "1 " + text
			}
			q, err := units.Parse(text)
			if err != nil || q.Dim != outDim || !(q.Value > 0) || math.IsInf(q.Value, 0) {
				p.bad(path+".unit", "expected a unit of the output (%s) such as m%s, or the value of one of the firmware's units such as 312.5 u%s, found %q",
					outDim, unitOfDim(outDim), unitOfDim(outDim), d.Unit)
			} else {
				c.Unit, c.UnitSI = d.Unit, q.Value
			}
		}
		switch f, err := numfmt.Parse(d.Format, "decimal"); {
		case d.Format == "":
			p.bad(path, "missing required key \"format\" (float32, or Q<m>.<n> such as Q2.14)")
		case err != nil:
			p.bad(path+".format", "%v", err)
		case f.Kind == numfmt.Scaled:
			p.bad(path+".format", "format %q: expected float32 or Q<m>.<n> (int<bits> with a scale is not modelled by the planner)", d.Format)
		default:
			c.Format = f
			if lo, hi := f.Range(); d.Adjusts == "gain" && !(lo <= 1 && 1 <= hi) {
				p.bad(path+".format", "%s cannot hold 1, a gain's no correction (its range is %s … %s): expected a format with a wider range",
					d.Format, units.FormatSig(lo, 6), units.FormatSig(hi, 6))
			}
		}
		b.Trim.Coefficients = append(b.Trim.Coefficients, c)
	}
}

// unitOfDim is the SI unit of an output dimension.
func unitOfDim(d units.Dim) string {
	if d == units.Ampere {
		return "A"
	}
	return "V"
}

// withDecodeErrs returns the decoding problems dec and the parser's own problems,
// leaving out those at the very place a decoding problem points at: a value that
// did not decode is zero, and a complaint about that zero would only repeat it.
func withDecodeErrs(dec, own files.List) files.List {
	if len(dec) == 0 {
		return own
	}
	type at struct{ line, col int }
	bad := map[at]bool{}
	for _, e := range dec {
		bad[at{e.Line, e.Col}] = true
	}
	out := append(files.List(nil), dec...)
	for _, e := range own {
		if e.Line == 0 || !bad[at{e.Line, e.Col}] {
			out = append(out, e)
		}
	}
	return out
}
