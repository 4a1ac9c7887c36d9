package sequencer

// skip_if: a condition over earlier steps' results, compiled at load.

import (
	"fmt"
	"strings"

	"github.com/expr-lang/expr"
	"github.com/expr-lang/expr/ast"
	"github.com/expr-lang/expr/vm"
)

// condition is a compiled skip_if expression and the results it reads.
type condition struct {
	prog *vm.Program
	uses []string
}

// compileCondition compiles text as a boolean expression over the results in
// scope (each a number in SI units, as limits see them). A name that is not in
// scope, a syntax error or a non-boolean expression is an error naming what is in
// scope.
func compileCondition(text string, scope []ResultDef) (*condition, error) {
	env := map[string]any{}
	var names []string
	for _, d := range scope {
		env[d.Name] = float64(0)
		names = append(names, d.Name)
	}
	prog, err := compileExpr(text, expr.Env(env), expr.AsBool(), expr.DisableBuiltin("now"), expr.DisableBuiltin("date"))
	if err != nil {
		msg := err.Error()
		if i := strings.Index(msg, "\n"); i >= 0 {
			msg = msg[:i]
		}
		known := "no results are computed before this step"
		if len(names) > 0 {
			known = "results of earlier steps: " + strings.Join(names, ", ")
		}
		return nil, fmt.Errorf("skip_if %q: %s (%s)", text, msg, known)
	}
	c := &condition{prog: prog}
	root := prog.Node()
	seen := map[string]bool{}
	ast.Walk(&root, identifiers(func(name string) {
		if _, ok := env[name]; ok && !seen[name] {
			seen[name] = true
			c.uses = append(c.uses, name)
		}
	}))
	return c, nil
}

// identifiers calls its function with the name of every identifier of an
// expression: the results a condition reads.
type identifiers func(name string)

func (f identifiers) Visit(n *ast.Node) {
	if id, ok := (*n).(*ast.IdentifierNode); ok {
		f(id.Value)
	}
}

func compileExpr(text string, opts ...expr.Option) (p *vm.Program, err error) {
	defer func() {
		if r := recover(); r != nil {
			p, err = nil, fmt.Errorf("the expression compiler failed: %v", r)
		}
	}()
	return expr.Compile(text, opts...)
}

// eval evaluates the condition over the unit's results. skip is false with a note
// when a result it reads is not valid: a step is never skipped on a number that
// was not measured.
func (c *condition) eval(u *Unit) (skip bool, note string, err error) {
	env := map[string]any{}
	for _, name := range c.uses {
		v, valid := u.Result(name) // a per-channel step's own channel's
		env[name] = v
		if !valid {
			return false, fmt.Sprintf("skip_if reads %s, which is not valid: the step runs", name), nil
		}
	}
	out, err := expr.Run(c.prog, env)
	if err != nil {
		return false, "", err
	}
	b, _ := out.(bool)
	return b, "", nil
}
