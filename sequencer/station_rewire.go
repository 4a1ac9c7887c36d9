package sequencer

import (
	"errors"
	"fmt"
	"maps"
	"path/filepath"
	"slices"

	"github.com/goccy/go-yaml"
)

// Served is what a served bench asks of the station file that reaches it, per role:
// the driver settings and templates its instruments need (the fixture's load_unit,
// the source's output watchdog).
type Served struct {
	Settings, Templates map[string]map[string]string
}

// Rewired writes a station file derived from st's own file (st.Raw), key for key:
// each instrument is at the address addrs gives its role, its settings and
// templates (the simulator's, which the bench being served holds) are replaced by
// those sv gives the role, and the station's name says it is served. Every other
// key is kept as the file has it (signing, release_keys, require_release, safety,
// interlock, step_deadline, timeouts, and keys added later), so certificates made
// through the copy are signed and released as st's are. The keys that hold paths
// (signing.key, release_keys, output.folder) are written absolute, resolved as st
// resolved them, so the copy works wherever it is written; a new key that holds a
// path must be added here. Comments are not kept.
//
// Errors: st has no file bytes, a role of st has no address in addrs, or the file
// does not decode as a mapping.
func (st *Station) Rewired(addrs map[string]string, sv Served) ([]byte, error) {
	if len(st.Raw) == 0 {
		return nil, errors.New("rewire station: the station has no file to rewire")
	}
	var tree yaml.MapSlice
	if err := yaml.UnmarshalWithOptions(st.Raw, &tree, yaml.UseOrderedMap()); err != nil {
		return nil, fmt.Errorf("rewire %s: %w", st.File.Name, err)
	}
	abs := func(p string) (string, error) {
		a, err := filepath.Abs(p)
		return filepath.ToSlash(a), err
	}
	var err error
	tree, err = editMap(tree, "station", func(m yaml.MapSlice) (yaml.MapSlice, error) {
		return setKey(m, "name", st.Name+" (served simulator)"), nil
	})
	if err != nil {
		return nil, err
	}
	tree, err = editMap(tree, "instruments", func(ins yaml.MapSlice) (yaml.MapSlice, error) {
		for _, r := range st.Roles() {
			if _, ok := st.Instruments[r]; !ok {
				continue
			}
			addr, ok := addrs[r]
			if !ok || addr == "" {
				return nil, fmt.Errorf("rewire %s: no served address for the %s", st.File.Name, r)
			}
			var err error
			ins, err = editMap(ins, r, func(in yaml.MapSlice) (yaml.MapSlice, error) {
				in = setKey(in, "address", addr)
				in = deleteKey(deleteKey(in, "settings"), "templates")
				for _, block := range []struct {
					key string
					m   map[string]string
				}{{"settings", sv.Settings[r]}, {"templates", sv.Templates[r]}} {
					if len(block.m) == 0 {
						continue
					}
					var kv yaml.MapSlice
					for _, k := range slices.Sorted(maps.Keys(block.m)) {
						kv = append(kv, yaml.MapItem{Key: k, Value: block.m[k]})
					}
					in = setKey(in, block.key, kv)
				}
				return in, nil
			})
			if err != nil {
				return nil, err
			}
		}
		return ins, nil
	})
	if err != nil {
		return nil, err
	}
	for _, p := range []struct {
		path     []string
		resolved string
	}{
		{[]string{"signing", "key"}, st.SigningKey},
		{[]string{"release_keys"}, st.ReleaseKeys},
		{[]string{"output", "folder"}, st.OutputFolder},
	} {
		if p.resolved == "" {
			continue
		}
		a, err := abs(p.resolved)
		if err != nil {
			return nil, fmt.Errorf("rewire %s: %w", st.File.Name, err)
		}
		if len(p.path) == 1 {
			tree = setKey(tree, p.path[0], a)
			continue
		}
		tree, err = editMap(tree, p.path[0], func(m yaml.MapSlice) (yaml.MapSlice, error) { return setKey(m, p.path[1], a), nil })
		if err != nil {
			return nil, err
		}
	}
	body, err := yaml.Marshal(tree)
	if err != nil {
		return nil, fmt.Errorf("rewire %s: %w", st.File.Name, err)
	}
	head := fmt.Sprintf("# Station %s, served over the wire by `trimline bench` / `trimline demo --transport`.\n"+
		"# Written from %s: every setting kept but the instruments' addresses and simulator settings.\n", st.ID, st.File.Name)
	return append([]byte(head), body...), nil
}

// editMap replaces the mapping under key in m by what edit makes of it (an empty
// mapping when m has no such key, appended at the end).
func editMap(m yaml.MapSlice, key string, edit func(yaml.MapSlice) (yaml.MapSlice, error)) (yaml.MapSlice, error) {
	for i, it := range m {
		if it.Key != key {
			continue
		}
		sub, ok := it.Value.(yaml.MapSlice)
		if !ok && it.Value != nil {
			return nil, fmt.Errorf("rewire: %s is not a mapping", key)
		}
		sub, err := edit(sub)
		if err != nil {
			return nil, err
		}
		m[i].Value = sub
		return m, nil
	}
	sub, err := edit(nil)
	if err != nil {
		return nil, err
	}
	return append(m, yaml.MapItem{Key: key, Value: sub}), nil
}

// setKey sets key in m to v, in place when m has it, else at the end.
func setKey(m yaml.MapSlice, key string, v any) yaml.MapSlice {
	for i, it := range m {
		if it.Key == key {
			m[i].Value = v
			return m
		}
	}
	return append(m, yaml.MapItem{Key: key, Value: v})
}

// deleteKey removes key from m.
func deleteKey(m yaml.MapSlice, key string) yaml.MapSlice {
	return slices.DeleteFunc(m, func(it yaml.MapItem) bool { return it.Key == key })
}
