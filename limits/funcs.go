package limits

import (
	"fmt"
	"math"
	"sync"

	"github.com/expr-lang/expr"
	"github.com/expr-lang/expr/builtin"
)

// registry holds the functions added with RegisterFunc, in registration order.
var registry struct {
	sync.RWMutex
	byName map[string]bool
	funcs  []registeredFunc
}

type registeredFunc struct {
	name  string
	fn    func(params ...any) (any, error)
	types []any
}

// keywords are words of the expression language that cannot name a function.
var keywords = map[string]bool{"not": true, "and": true, "or": true, "in": true, "matches": true,
	"contains": true, "startsWith": true, "endsWith": true, "let": true, "if": true, "else": true,
	"true": true, "false": true, "nil": true}

// RegisterFunc adds a function that limit expressions may call by name, the way
// image.RegisterFormat adds a decoder. fn receives the call's arguments and returns
// its value or an error; an error at judge time fails the limit with that error as
// the reason. types are optional signatures for expr-lang's checker (for example
// new(func(float64, float64) bool)); with them, a call with the wrong number or
// kind of arguments is rejected when the limit file is loaded.
//
// Call RegisterFunc from an init function: a Set sees the functions registered
// before its Load. RegisterFunc is safe for concurrent use. It panics when fn is
// nil, when name is not an identifier, when name is a word or built-in function of
// the expression language (abs, min, max, ...), or when name is already registered.
func RegisterFunc(name string, fn func(params ...any) (any, error), types ...any) {
	if fn == nil {
		panic(fmt.Sprintf("limits: RegisterFunc(%q) with a nil func", name))
	}
	if !isIdent(name) {
		panic(fmt.Sprintf("limits: RegisterFunc(%q): name is not an identifier", name))
	}
	if keywords[name] || isBuiltin(name) {
		panic(fmt.Sprintf("limits: RegisterFunc(%q): name is part of the expression language", name))
	}
	registry.Lock()
	defer registry.Unlock()
	if registry.byName[name] {
		panic(fmt.Sprintf("limits: RegisterFunc(%q) called twice", name))
	}
	if registry.byName == nil {
		registry.byName = map[string]bool{}
	}
	registry.byName[name] = true
	registry.funcs = append(registry.funcs, registeredFunc{name: name, fn: fn, types: types})
}

// funcOptions returns the expr options that make every registered function
// callable.
func funcOptions() []expr.Option {
	registry.RLock()
	defer registry.RUnlock()
	opts := make([]expr.Option, 0, len(registry.funcs))
	for _, f := range registry.funcs {
		opts = append(opts, expr.Function(f.name, f.fn, f.types...))
	}
	return opts
}

func isBuiltin(name string) bool {
	for _, b := range builtin.Builtins {
		if b.Name == name {
			return true
		}
	}
	return false
}

func isIdent(s string) bool {
	if s == "" {
		return false
	}
	for i, r := range s {
		switch {
		case r == '_', r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z':
		case i > 0 && r >= '0' && r <= '9':
		default:
			return false
		}
	}
	return true
}

func init() {
	sig := new(func(x, lo, hi float64) bool)
	RegisterFunc("within", within, sig)
	RegisterFunc("outside", outside, sig)
}

// within(x, lo, hi) is true when lo ≤ x ≤ hi. It is an error for lo to exceed hi.
// A NaN anywhere gives false (the judge never lets a NaN result reach it).
func within(p ...any) (any, error) {
	x, lo, hi, err := bounds("within", p)
	if err != nil {
		return nil, err
	}
	return lo <= x && x <= hi, nil
}

// outside(x, lo, hi) is true when x < lo or x > hi. It is an error for lo to exceed
// hi. A NaN anywhere gives false.
func outside(p ...any) (any, error) {
	x, lo, hi, err := bounds("outside", p)
	if err != nil {
		return nil, err
	}
	return x < lo || x > hi, nil
}

func bounds(fn string, p []any) (x, lo, hi float64, err error) {
	if len(p) != 3 {
		return 0, 0, 0, fmt.Errorf("%s expects 3 arguments (x, lo, hi), got %d", fn, len(p))
	}
	var v [3]float64
	for i, a := range p {
		f, ok := toFloat(a)
		if !ok {
			return 0, 0, 0, fmt.Errorf("%s: argument %d is %T, not a number", fn, i+1, a)
		}
		v[i] = f
	}
	if v[1] > v[2] {
		return 0, 0, 0, fmt.Errorf("%s: lo %g is above hi %g", fn, v[1], v[2])
	}
	return v[0], v[1], v[2], nil
}

func toFloat(a any) (float64, bool) {
	switch v := a.(type) {
	case float64:
		return v, true
	case float32:
		return float64(v), true
	case int:
		return float64(v), true
	case int64:
		return float64(v), true
	case int32:
		return float64(v), true
	case uint:
		return float64(v), true
	case uint64:
		return float64(v), true
	}
	return math.NaN(), false
}
