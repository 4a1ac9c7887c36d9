// Package sequences holds the example station, sequence and limit files of the demo
// products, invented products of an invented maker. They are data: each product is
// three files, NAME-station.yaml, NAME-sequence.yaml and the limit file its sequence
// names, and no product has Go code of its own. This file only embeds them and
// lists them, so `trimline demo` can write one out.
package sequences

import (
	"embed"
	"fmt"
	"io/fs"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"github.com/goccy/go-yaml"
)

// Demo holds the demo files of every product.
//
//go:embed *.yaml
var Demo embed.FS

// Default is the product `trimline demo` runs when none is named.
const Default = "BRX-200"

// Product is one demo product: its name and the names of its three files in Demo.
type Product struct {
	Name     string // the sequence's product, e.g. "BRX-200"
	Station  string // e.g. "brx200-station.yaml"
	Sequence string // e.g. "brx200-sequence.yaml"
	Limits   string // the limit file the sequence names
	// SerialPrefix and SerialDigits make the demo's serials (prefix + a zero-padded
	// number), read off the sequence's serial_pattern ("BRX-[0-9]{5}").
	SerialPrefix string
	SerialDigits int
}

// Serial returns the demo's i-th serial of the product (1-based).
func (p Product) Serial(i int) string {
	return fmt.Sprintf("%s%0*d", p.SerialPrefix, p.SerialDigits, i)
}

// simplePattern is the serial pattern shape the demo can count through.
var simplePattern = regexp.MustCompile(`^([A-Za-z0-9_-]*)\[0-9\]\{(\d)\}$`)

// Products lists the demo products, sorted by name. A sequence file in Demo that
// does not say its product, limit file and a countable serial pattern is an error:
// the demo could not run it.
func Products() ([]Product, error) {
	names, err := fs.Glob(Demo, "*-sequence.yaml")
	if err != nil {
		return nil, err
	}
	var out []Product
	for _, n := range names {
		data, err := fs.ReadFile(Demo, n)
		if err != nil {
			return nil, err
		}
		var f struct {
			Sequence struct {
				Product string `yaml:"product"`
			} `yaml:"sequence"`
			Limits        string `yaml:"limits"`
			SerialPattern string `yaml:"serial_pattern"`
		}
		if err := yaml.Unmarshal(data, &f); err != nil {
			return nil, fmt.Errorf("sequences: %s: %w", n, err)
		}
		p := Product{Name: f.Sequence.Product, Sequence: n, Limits: f.Limits,
			Station: strings.TrimSuffix(n, "-sequence.yaml") + "-station.yaml"}
		m := simplePattern.FindStringSubmatch(f.SerialPattern)
		if p.Name == "" || p.Limits == "" || m == nil {
			return nil, fmt.Errorf("sequences: %s: expected sequence.product, limits and a serial_pattern of the form PREFIX[0-9]{N}", n)
		}
		p.SerialPrefix = m[1]
		p.SerialDigits, _ = strconv.Atoi(m[2])
		for _, f := range []string{p.Station, p.Limits} {
			if _, err := fs.Stat(Demo, f); err != nil {
				return nil, fmt.Errorf("sequences: %s: %s is missing", n, f)
			}
		}
		out = append(out, p)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out, nil
}

// Find returns the product called name, compared without regard to case; the error
// lists the products there are.
func Find(name string) (Product, error) {
	ps, err := Products()
	if err != nil {
		return Product{}, err
	}
	var names []string
	for _, p := range ps {
		if strings.EqualFold(p.Name, name) {
			return p, nil
		}
		names = append(names, p.Name)
	}
	return Product{}, fmt.Errorf("no demo product %q: expected one of %s", name, strings.Join(names, ", "))
}
