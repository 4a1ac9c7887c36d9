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
}

// Limit is one compiled limit of a Set, in file order.
type Limit struct {
	Name        string   // unique within the Set, ignoring case and runs of spaces
	Description string   // what the limit is for, in words
	Unit        string   // unit the used results are expressed in inside Expr ("uV", "ppm", "code", "")
	Expr        string   // the expression as written, surrounding white space removed
	Uses        []string // the result names Expr uses, as listed (Load checks each appears in Expr)
	Line        int      // line of the limit's entry ("- name: ...") in the file

	prog  *vm.Program
	scale float64 // SI value of one Unit: a result in SI is V/scale in Unit
	pow10 bool    // scale is exactly 10^exp10
	exp10 int
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
