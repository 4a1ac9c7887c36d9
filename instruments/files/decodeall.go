package files

// DecodeAll: strict decoding that reports every problem of a file, not the first.

import (
	"encoding"
	"reflect"
	"strings"

	"github.com/goccy/go-yaml"
	"github.com/goccy/go-yaml/ast"
)

// DecodeAll decodes the document into v (a pointer) strictly, like Decode, but does
// not stop at the first problem: every unknown key, duplicate key, wrong type and
// malformed value comes back, as a List sorted by position, so a bad unit in one
// place does not hide an unknown key in another.
//
// Each mapping is walked against its struct (by yaml tags) and each value decoded
// into its own field; a value that fails leaves its field at the zero value, and a
// pointer field set (to a zero value), so that a loader's own checks find the key
// present. A file whose top is not one mapping, or that uses anchors, aliases, merge
// keys or tags, is decoded by Decode (first problem only).
func (d *Doc) DecodeAll(v any) (err error) {
	defer recoverYAML(d.Name, &err)
	rv := reflect.ValueOf(v)
	if d.Root() == nil || len(d.ast.Docs) != 1 || rv.Kind() != reflect.Pointer || rv.IsNil() || !plainTree(d.ast.Docs[0].Body) {
		return d.Decode(v)
	}
	var errs List
	d.decodeInto(d.ast.Docs[0].Body, rv.Elem(), &errs)
	if len(errs) > 0 {
		errs.Sort()
		return errs
	}
	return nil
}

// plainTree reports whether n holds no anchor, alias, merge key or tag, whose
// meaning spans more than one value.
func plainTree(n ast.Node) bool {
	ok := true
	ast.Walk(visitor(func(x ast.Node) bool {
		switch x.(type) {
		case *ast.AnchorNode, *ast.AliasNode, *ast.TagNode, *ast.MergeKeyNode:
			ok = false
		}
		return ok
	}), n)
	return ok
}

func (d *Doc) decodeInto(n ast.Node, v reflect.Value, errs *List) {
	t := v.Type()
	if leafType(t) {
		d.leaf(n, v, errs)
		return
	}
	if _, null := n.(*ast.NullNode); null {
		return // an empty section: its keys are missing, which the loader reports
	}
	switch t.Kind() {
	case reflect.Pointer:
		if v.IsNil() {
			v.Set(reflect.New(t.Elem()))
		}
		d.decodeInto(n, v.Elem(), errs)
	case reflect.Struct:
		entries, ok := mappingEntries(n)
		fields, plain := yamlFields(t)
		if !ok || !plain {
			d.leaf(n, v, errs) // the YAML library's own message for the wrong shape
			return
		}
		seen := map[string]*ast.MappingValueNode{}
		for _, mv := range entries {
			key, dup := d.key(mv, seen, errs)
			if dup {
				continue
			}
			i, known := fields[key]
			if !known {
				line, col := tokPos(mv.Key.GetToken())
				*errs = append(*errs, d.At(line, col, "unknown field %q", key))
				continue
			}
			d.decodeInto(mv.Value, v.Field(i), errs)
		}
	case reflect.Map:
		entries, ok := mappingEntries(n)
		if !ok || t.Key().Kind() != reflect.String {
			d.leaf(n, v, errs)
			return
		}
		if v.IsNil() {
			v.Set(reflect.MakeMap(t))
		}
		seen := map[string]*ast.MappingValueNode{}
		for _, mv := range entries {
			key, dup := d.key(mv, seen, errs)
			if dup {
				continue
			}
			ev := reflect.New(t.Elem()).Elem()
			d.decodeInto(mv.Value, ev, errs)
			v.SetMapIndex(reflect.ValueOf(key).Convert(t.Key()), ev)
		}
	case reflect.Slice:
		seq, ok := n.(*ast.SequenceNode)
		if !ok {
			d.leaf(n, v, errs)
			return
		}
		s := reflect.MakeSlice(t, len(seq.Values), len(seq.Values))
		for i, e := range seq.Values {
			d.decodeInto(e, s.Index(i), errs)
		}
		v.Set(s)
	default:
		d.leaf(n, v, errs)
	}
}

// key returns the key of mv and whether it repeats one already seen (reported).
func (d *Doc) key(mv *ast.MappingValueNode, seen map[string]*ast.MappingValueNode, errs *List) (string, bool) {
	tk := mv.Key.GetToken()
	key := ""
	if tk != nil {
		key = tk.Value
	}
	if first, dup := seen[key]; dup {
		line, col := tokPos(tk)
		fl, fc := tokPos(first.Key.GetToken())
		*errs = append(*errs, d.At(line, col, "duplicate key: mapping key %q already defined at [%d:%d]", key, fl, fc))
		return key, true
	}
	seen[key] = mv
	return key, false
}

// leaf decodes n into v with the YAML library, strictly. A pointer is allocated
// here (the library does not allocate through a pointer to a pointer) unless the
// value is null; on error the value pointed at is the zero value.
func (d *Doc) leaf(n ast.Node, v reflect.Value, errs *List) {
	if v.Kind() == reflect.Pointer {
		if _, null := n.(*ast.NullNode); null {
			v.Set(reflect.Zero(v.Type()))
			return
		}
		e := reflect.New(v.Type().Elem())
		d.leaf(n, e.Elem(), errs)
		v.Set(e)
		return
	}
	p := reflect.New(v.Type())
	if err := yaml.NodeToValue(n, p.Interface(), yaml.Strict()); err != nil {
		if fe := Errs(d.convert(err)); fe != nil {
			*errs = append(*errs, fe...)
		}
		p.Elem().Set(reflect.Zero(v.Type()))
	}
	v.Set(p.Elem())
}

func mappingEntries(n ast.Node) ([]*ast.MappingValueNode, bool) {
	switch m := n.(type) {
	case *ast.MappingNode:
		return m.Values, true
	case *ast.MappingValueNode:
		return []*ast.MappingValueNode{m}, true
	}
	return nil, false
}

// yamlFields maps the YAML keys of struct type t to field indexes; plain is false
// when a field is inlined (left to the YAML library).
func yamlFields(t reflect.Type) (fields map[string]int, plain bool) {
	fields = map[string]int{}
	for i := range t.NumField() {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		tag := f.Tag.Get("yaml")
		if tag == "-" {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		if strings.Contains(opts, "inline") {
			return nil, false
		}
		if name == "" {
			name = strings.ToLower(f.Name)
		}
		fields[name] = i
	}
	return fields, true
}

var unmarshalers = []reflect.Type{
	reflect.TypeFor[yaml.BytesUnmarshaler](), reflect.TypeFor[yaml.BytesUnmarshalerContext](),
	reflect.TypeFor[yaml.InterfaceUnmarshaler](), reflect.TypeFor[yaml.InterfaceUnmarshalerContext](),
	reflect.TypeFor[yaml.NodeUnmarshaler](), reflect.TypeFor[yaml.NodeUnmarshalerContext](),
	reflect.TypeFor[encoding.TextUnmarshaler](),
}

// leafType reports whether values of t are decoded whole by the YAML library: not
// a struct, map or slice (through pointers), or a type that decodes itself.
func leafType(t reflect.Type) bool {
	for t.Kind() == reflect.Pointer {
		if implementsAny(t) {
			return true
		}
		t = t.Elem()
	}
	if implementsAny(t) || implementsAny(reflect.PointerTo(t)) {
		return true
	}
	switch t.Kind() {
	case reflect.Struct, reflect.Map, reflect.Slice:
		return t.Kind() == reflect.Slice && t.Elem().Kind() == reflect.Uint8
	}
	return true
}

func implementsAny(t reflect.Type) bool {
	for _, u := range unmarshalers {
		if t.Implements(u) {
			return true
		}
	}
	return false
}

// DecodeAt decodes the mapping at path (a YAML path such as "$.steps[2]") into v
// (a pointer to a struct) as DecodeAll does, with every problem positioned, but
// leaves out the keys for which skip reports true: a caller that decodes one
// mapping in two parts (the keys every step has, then the keys of its kind) gives
// each part the other's keys to skip, so that neither reports them as unknown. A
// nil skip leaves out nothing. Nothing at path decodes nothing and is no error.
func (d *Doc) DecodeAt(path string, v any, skip func(key string) bool) (err error) {
	defer recoverYAML(d.Name, &err)
	n := d.node(path)
	if n == nil {
		return nil
	}
	if mv, ok := n.(*ast.MappingValueNode); ok && path != "$" && !strings.HasSuffix(path, "]") {
		n = mv.Value
	}
	rv := reflect.ValueOf(v)
	if rv.Kind() != reflect.Pointer || rv.IsNil() || rv.Elem().Kind() != reflect.Struct {
		return &Error{File: d.Name, Msg: "files: DecodeAt needs a pointer to a struct"}
	}
	if !plainTree(n) {
		line, col := tokPos(n.GetToken())
		return List{d.At(line, col, "anchors, aliases, merge keys and tags are not allowed here")}
	}
	entries, ok := mappingEntries(n)
	if !ok {
		if _, null := n.(*ast.NullNode); null {
			return nil
		}
		line, col := tokPos(n.GetToken())
		return List{d.At(line, col, "expected a mapping of keys")}
	}
	fields, _ := yamlFields(rv.Elem().Type())
	var errs List
	seen := map[string]*ast.MappingValueNode{}
	for _, mv := range entries {
		key, dup := d.key(mv, seen, &errs)
		if dup || skip != nil && skip(key) {
			continue
		}
		i, known := fields[key]
		if !known {
			line, col := tokPos(mv.Key.GetToken())
			errs = append(errs, d.At(line, col, "unknown field %q", key))
			continue
		}
		d.decodeInto(mv.Value, rv.Elem().Field(i), &errs)
	}
	if len(errs) > 0 {
		errs.Sort()
		return errs
	}
	return nil
}

// Keys returns the keys of the mapping at path in file order, nil when nothing or
// no mapping is there.
func (d *Doc) Keys(path string) []string {
	n := d.node(path)
	if mv, ok := n.(*ast.MappingValueNode); ok && path != "$" && !strings.HasSuffix(path, "]") {
		n = mv.Value
	}
	entries, ok := mappingEntries(n)
	if !ok {
		return nil
	}
	out := make([]string, 0, len(entries))
	for _, mv := range entries {
		if tk := mv.Key.GetToken(); tk != nil {
			out = append(out, tk.Value)
		}
	}
	return out
}

// Len returns the number of items of the sequence at path, 0 when nothing or no
// sequence is there.
func (d *Doc) Len(path string) int {
	n := d.node(path)
	if mv, ok := n.(*ast.MappingValueNode); ok {
		n = mv.Value
	}
	if s, ok := n.(*ast.SequenceNode); ok {
		return len(s.Values)
	}
	return 0
}

// Shared returns the position of the first anchor, alias, merge key or tag of the
// document (whose meaning spans more than one value), ok false when it has none.
func (d *Doc) Shared() (line, col int, ok bool) {
	if d.ast == nil {
		return 0, 0, false
	}
	for _, doc := range d.ast.Docs {
		ast.Walk(visitor(func(x ast.Node) bool {
			switch x.(type) {
			case *ast.AnchorNode, *ast.AliasNode, *ast.TagNode, *ast.MergeKeyNode:
				if !ok {
					line, col = tokPos(x.GetToken())
					ok = true
				}
			}
			return !ok
		}), doc)
	}
	return line, col, ok
}
