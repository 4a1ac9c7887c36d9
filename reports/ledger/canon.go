package ledger

import (
	"encoding"
	"encoding/base64"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"sync"
)

// This file is the ledger's canonical JSON. For a value whose floats are all finite,
// canonicalJSON returns exactly the bytes json.Marshal returns (the tests hold it to
// that). json.Marshal refuses NaN and ±Inf, which real runs do contain (a flagged
// reading, an invalid result, the residual SD of a fit with no degrees of freedom),
// so canonicalJSON writes those as the JSON strings "NaN", "Infinity" and
// "-Infinity" where a number belongs. decodeCanonical reads both forms back.
//
// Supported: bool, integers, floats, strings, slices, arrays, maps with string or
// integer keys, structs with json tags (omitempty, omitzero), pointers, and any type
// that implements json.Marshaler / json.Unmarshaler or encoding.TextMarshaler /
// encoding.TextUnmarshaler (delegated to encoding/json). Anything else — embedded
// struct fields, the ",string" option, channels, funcs, non-empty interfaces — is an
// error, so a change to the Record that this code cannot store exactly fails loudly
// in the tests instead of silently losing data.

const (
	jsonNaN    = "NaN"
	jsonPosInf = "Infinity"
	jsonNegInf = "-Infinity"
)

var (
	jsonMarshalerType      = reflect.TypeFor[json.Marshaler]()
	jsonUnmarshalerType    = reflect.TypeFor[json.Unmarshaler]()
	textMarshalerType      = reflect.TypeFor[encoding.TextMarshaler]()
	textUnmarshalerType    = reflect.TypeFor[encoding.TextUnmarshaler]()
	isZeroerType           = reflect.TypeFor[interface{ IsZero() bool }]()
	errUnsupportedJSONType = errors.New("type not supported by the ledger's canonical JSON")
)

// canonicalJSON encodes v as described at the top of this file.
func canonicalJSON(v any) ([]byte, error) {
	e := encoder{buf: make([]byte, 0, 4096)}
	if err := e.value(reflect.ValueOf(v), "$"); err != nil {
		return nil, err
	}
	return e.buf, nil
}

type encoder struct{ buf []byte }

func (e *encoder) delegate(v any, path string) error {
	b, err := json.Marshal(v)
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	e.buf = append(e.buf, b...)
	return nil
}

func (e *encoder) value(v reflect.Value, path string) error {
	if !v.IsValid() {
		e.buf = append(e.buf, "null"...)
		return nil
	}
	t := v.Type()
	if (v.Kind() == reflect.Pointer || v.Kind() == reflect.Interface) && v.IsNil() {
		e.buf = append(e.buf, "null"...)
		return nil
	}
	if t.Implements(jsonMarshalerType) || t.Implements(textMarshalerType) {
		return e.delegate(v.Interface(), path)
	}
	if v.CanAddr() && (reflect.PointerTo(t).Implements(jsonMarshalerType) || reflect.PointerTo(t).Implements(textMarshalerType)) {
		return e.delegate(v.Addr().Interface(), path)
	}
	switch v.Kind() {
	case reflect.Bool:
		e.buf = strconv.AppendBool(e.buf, v.Bool())
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		e.buf = strconv.AppendInt(e.buf, v.Int(), 10)
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		e.buf = strconv.AppendUint(e.buf, v.Uint(), 10)
	case reflect.Float32, reflect.Float64:
		f := v.Float()
		switch {
		case math.IsNaN(f):
			e.buf = strconv.AppendQuote(e.buf, jsonNaN)
		case math.IsInf(f, 1):
			e.buf = strconv.AppendQuote(e.buf, jsonPosInf)
		case math.IsInf(f, -1):
			e.buf = strconv.AppendQuote(e.buf, jsonNegInf)
		default:
			return e.delegate(v.Interface(), path)
		}
	case reflect.String:
		return e.delegate(v.String(), path)
	case reflect.Slice:
		if v.IsNil() {
			e.buf = append(e.buf, "null"...)
			return nil
		}
		if t.Elem().Kind() == reflect.Uint8 && !implementsAny(t.Elem()) {
			return e.delegate(v.Interface(), path) // base64, as json.Marshal does
		}
		return e.array(v, path)
	case reflect.Array:
		return e.array(v, path)
	case reflect.Map:
		if v.IsNil() {
			e.buf = append(e.buf, "null"...)
			return nil
		}
		return e.mapValue(v, path)
	case reflect.Struct:
		return e.structValue(v, path)
	case reflect.Pointer:
		return e.value(v.Elem(), path)
	case reflect.Interface:
		return e.value(v.Elem(), path)
	default:
		return fmt.Errorf("%s: %s: %w", path, t, errUnsupportedJSONType)
	}
	return nil
}

func implementsAny(t reflect.Type) bool {
	p := reflect.PointerTo(t)
	return t.Implements(jsonMarshalerType) || t.Implements(textMarshalerType) ||
		p.Implements(jsonMarshalerType) || p.Implements(textMarshalerType)
}

func (e *encoder) array(v reflect.Value, path string) error {
	e.buf = append(e.buf, '[')
	for i := range v.Len() {
		if i > 0 {
			e.buf = append(e.buf, ',')
		}
		if err := e.value(v.Index(i), path+"["+strconv.Itoa(i)+"]"); err != nil {
			return err
		}
	}
	e.buf = append(e.buf, ']')
	return nil
}

func (e *encoder) mapValue(v reflect.Value, path string) error {
	kt := v.Type().Key()
	type kv struct {
		key string
		val reflect.Value
	}
	entries := make([]kv, 0, v.Len())
	it := v.MapRange()
	for it.Next() {
		k := it.Key()
		var ks string
		switch {
		case kt.Kind() == reflect.String: // encoding/json ignores TextMarshaler here too
			ks = k.String()
		case kt.Implements(textMarshalerType):
			return fmt.Errorf("%s: map key %s: %w", path, kt, errUnsupportedJSONType)
		case k.CanInt():
			ks = strconv.FormatInt(k.Int(), 10)
		case k.CanUint():
			ks = strconv.FormatUint(k.Uint(), 10)
		default:
			return fmt.Errorf("%s: map key %s: %w", path, kt, errUnsupportedJSONType)
		}
		entries = append(entries, kv{ks, it.Value()})
	}
	slices.SortFunc(entries, func(a, b kv) int { return strings.Compare(a.key, b.key) })
	e.buf = append(e.buf, '{')
	for i, en := range entries {
		if i > 0 {
			e.buf = append(e.buf, ',')
		}
		if err := e.delegate(en.key, path); err != nil {
			return err
		}
		e.buf = append(e.buf, ':')
		if err := e.value(en.val, path+"["+strconv.Quote(en.key)+"]"); err != nil {
			return err
		}
	}
	e.buf = append(e.buf, '}')
	return nil
}

func (e *encoder) structValue(v reflect.Value, path string) error {
	fields, err := structFields(v.Type())
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	e.buf = append(e.buf, '{')
	first := true
	for _, f := range fields {
		fv := v.Field(f.index)
		if f.omitEmpty && isEmptyValue(fv) || f.omitZero && isZeroValue(fv) {
			continue
		}
		if !first {
			e.buf = append(e.buf, ',')
		}
		first = false
		e.buf = append(e.buf, f.quoted...)
		e.buf = append(e.buf, ':')
		if err := e.value(fv, path+"."+f.name); err != nil {
			return err
		}
	}
	e.buf = append(e.buf, '}')
	return nil
}

// isEmptyValue is encoding/json's definition of empty for omitempty.
func isEmptyValue(v reflect.Value) bool {
	switch v.Kind() {
	case reflect.Array, reflect.Map, reflect.Slice, reflect.String:
		return v.Len() == 0
	case reflect.Bool, reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr,
		reflect.Float32, reflect.Float64, reflect.Interface, reflect.Pointer:
		return v.IsZero()
	}
	return false
}

// isZeroValue is encoding/json's definition of zero for omitzero.
func isZeroValue(v reflect.Value) bool {
	t := v.Type()
	if t.Implements(isZeroerType) {
		if (v.Kind() == reflect.Pointer || v.Kind() == reflect.Interface) && v.IsNil() {
			return true
		}
		return v.Interface().(interface{ IsZero() bool }).IsZero()
	}
	if v.CanAddr() && reflect.PointerTo(t).Implements(isZeroerType) {
		return v.Addr().Interface().(interface{ IsZero() bool }).IsZero()
	}
	return v.IsZero()
}

type field struct {
	index     int
	name      string
	quoted    []byte // name as a JSON string
	omitEmpty bool
	omitZero  bool
}

var fieldCache sync.Map // reflect.Type -> []field

func structFields(t reflect.Type) ([]field, error) {
	if f, ok := fieldCache.Load(t); ok {
		return f.([]field), nil
	}
	var out []field
	for i := range t.NumField() {
		sf := t.Field(i)
		if sf.Anonymous {
			return nil, fmt.Errorf("%s: embedded field %s: %w", t, sf.Name, errUnsupportedJSONType)
		}
		if !sf.IsExported() {
			continue
		}
		tag := sf.Tag.Get("json")
		if tag == "-" {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		if name == "" {
			name = sf.Name
		}
		f := field{index: i, name: name}
		for _, o := range strings.Split(opts, ",") {
			switch o {
			case "":
			case "omitempty":
				f.omitEmpty = true
			case "omitzero":
				f.omitZero = true
			default:
				return nil, fmt.Errorf("%s.%s: json option %q: %w", t, sf.Name, o, errUnsupportedJSONType)
			}
		}
		q, err := json.Marshal(name)
		if err != nil {
			return nil, err
		}
		f.quoted = q
		out = append(out, f)
	}
	fieldCache.Store(t, out)
	return out, nil
}

// decodeCanonical decodes data, made by canonicalJSON, into v (a non-nil pointer).
// A document with no non-finite numbers is decoded by json.Unmarshal; one with them
// (json.Unmarshal rejects a string where a number belongs) is decoded again, into a
// fresh value, by the type-directed decoder below, which understands "NaN",
// "Infinity" and "-Infinity" in number positions.
func decodeCanonical(data []byte, v any) error {
	rv := reflect.ValueOf(v)
	if rv.Kind() != reflect.Pointer || rv.IsNil() {
		return errors.New("decodeCanonical: need a non-nil pointer")
	}
	fresh := reflect.New(rv.Elem().Type())
	err := json.Unmarshal(data, fresh.Interface())
	var typeErr *json.UnmarshalTypeError
	if errors.As(err, &typeErr) {
		fresh = reflect.New(rv.Elem().Type())
		err = decodeExtended(data, fresh.Interface())
	}
	if err != nil {
		return err
	}
	rv.Elem().Set(fresh.Elem())
	return nil
}

// decodeExtended is the type-directed decoder: data is parsed into a generic tree
// (numbers kept as their literal text) and assigned into v field by field.
func decodeExtended(data []byte, v any) error {
	dec := json.NewDecoder(strings.NewReader(string(data)))
	dec.UseNumber()
	var tree any
	if err := dec.Decode(&tree); err != nil {
		return err
	}
	if dec.More() {
		return errors.New("canonical JSON: data after the top-level value")
	}
	return assign(reflect.ValueOf(v).Elem(), tree, "$")
}

func assign(v reflect.Value, x any, path string) error {
	if x == nil {
		v.SetZero()
		return nil
	}
	if v.CanAddr() {
		p := v.Addr()
		if p.Type().Implements(jsonUnmarshalerType) {
			raw, err := json.Marshal(x)
			if err != nil {
				return fmt.Errorf("%s: %w", path, err)
			}
			if err := p.Interface().(json.Unmarshaler).UnmarshalJSON(raw); err != nil {
				return fmt.Errorf("%s: %w", path, err)
			}
			return nil
		}
		if p.Type().Implements(textUnmarshalerType) {
			s, ok := x.(string)
			if !ok {
				return mismatch(path, v, x)
			}
			if err := p.Interface().(encoding.TextUnmarshaler).UnmarshalText([]byte(s)); err != nil {
				return fmt.Errorf("%s: %w", path, err)
			}
			return nil
		}
	}
	switch v.Kind() {
	case reflect.Bool:
		b, ok := x.(bool)
		if !ok {
			return mismatch(path, v, x)
		}
		v.SetBool(b)
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		n, ok := x.(json.Number)
		if !ok {
			return mismatch(path, v, x)
		}
		i, err := strconv.ParseInt(string(n), 10, v.Type().Bits())
		if err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		v.SetInt(i)
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		n, ok := x.(json.Number)
		if !ok {
			return mismatch(path, v, x)
		}
		u, err := strconv.ParseUint(string(n), 10, v.Type().Bits())
		if err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		v.SetUint(u)
	case reflect.Float32, reflect.Float64:
		switch n := x.(type) {
		case json.Number:
			f, err := strconv.ParseFloat(string(n), v.Type().Bits())
			if err != nil {
				return fmt.Errorf("%s: %w", path, err)
			}
			v.SetFloat(f)
		case string:
			switch n {
			case jsonNaN:
				v.SetFloat(math.NaN())
			case jsonPosInf:
				v.SetFloat(math.Inf(1))
			case jsonNegInf:
				v.SetFloat(math.Inf(-1))
			default:
				return mismatch(path, v, x)
			}
		default:
			return mismatch(path, v, x)
		}
	case reflect.String:
		s, ok := x.(string)
		if !ok {
			return mismatch(path, v, x)
		}
		v.SetString(s)
	case reflect.Slice:
		if v.Type().Elem().Kind() == reflect.Uint8 && !implementsAny(v.Type().Elem()) {
			s, ok := x.(string)
			if !ok {
				return mismatch(path, v, x)
			}
			b, err := base64.StdEncoding.DecodeString(s)
			if err != nil {
				return fmt.Errorf("%s: %w", path, err)
			}
			v.SetBytes(b)
			return nil
		}
		a, ok := x.([]any)
		if !ok {
			return mismatch(path, v, x)
		}
		s := reflect.MakeSlice(v.Type(), len(a), len(a))
		for i, el := range a {
			if err := assign(s.Index(i), el, path+"["+strconv.Itoa(i)+"]"); err != nil {
				return err
			}
		}
		v.Set(s)
	case reflect.Array:
		a, ok := x.([]any)
		if !ok {
			return mismatch(path, v, x)
		}
		for i := range v.Len() {
			if i < len(a) {
				if err := assign(v.Index(i), a[i], path+"["+strconv.Itoa(i)+"]"); err != nil {
					return err
				}
			} else {
				v.Index(i).SetZero()
			}
		}
	case reflect.Map:
		obj, ok := x.(map[string]any)
		if !ok {
			return mismatch(path, v, x)
		}
		t := v.Type()
		m := reflect.MakeMapWithSize(t, len(obj))
		for k, el := range obj {
			key := reflect.New(t.Key()).Elem()
			switch {
			case t.Key().Kind() == reflect.String:
				key.SetString(k)
			case key.CanInt():
				i, err := strconv.ParseInt(k, 10, t.Key().Bits())
				if err != nil {
					return fmt.Errorf("%s: map key: %w", path, err)
				}
				key.SetInt(i)
			case key.CanUint():
				u, err := strconv.ParseUint(k, 10, t.Key().Bits())
				if err != nil {
					return fmt.Errorf("%s: map key: %w", path, err)
				}
				key.SetUint(u)
			default:
				return fmt.Errorf("%s: map key %s: %w", path, t.Key(), errUnsupportedJSONType)
			}
			val := reflect.New(t.Elem()).Elem()
			if err := assign(val, el, path+"["+strconv.Quote(k)+"]"); err != nil {
				return err
			}
			m.SetMapIndex(key, val)
		}
		v.Set(m)
	case reflect.Struct:
		obj, ok := x.(map[string]any)
		if !ok {
			return mismatch(path, v, x)
		}
		fields, err := structFields(v.Type())
		if err != nil {
			return fmt.Errorf("%s: %w", path, err)
		}
		for _, f := range fields {
			el, present := obj[f.name]
			if !present {
				continue
			}
			if err := assign(v.Field(f.index), el, path+"."+f.name); err != nil {
				return err
			}
		}
	case reflect.Pointer:
		if v.IsNil() {
			v.Set(reflect.New(v.Type().Elem()))
		}
		return assign(v.Elem(), x, path)
	default:
		return fmt.Errorf("%s: %s: %w", path, v.Type(), errUnsupportedJSONType)
	}
	return nil
}

func mismatch(path string, v reflect.Value, x any) error {
	return fmt.Errorf("%s: cannot store JSON %T %v in %s", path, x, x, v.Type())
}
