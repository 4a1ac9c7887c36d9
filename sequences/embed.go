// Package sequences holds the example station, sequence and limit files for the
// demo product, an invented bridge amplifier card. They are data; this file only
// embeds them so `trimline demo` can write them out.
package sequences

import "embed"

// Demo holds the demo files: brx200-station.yaml, brx200-sequence.yaml,
// brx200-limits.yaml.
//
//go:embed *.yaml
var Demo embed.FS
