package sequencer

import (
	"bytes"
	"strings"

	"github.com/goccy/go-yaml"

	"trimline/instruments/files"
)

// The kinds of file a station reads, as FileRef.Kind and the ledger record them.
const (
	FileStation  = "station"  // a station file: instruments, safety caps, output
	FileSequence = "sequence" // a sequence file: the product's sweeps and trims
	FileLimits   = "limits"   // a limit file: what the results are judged against
)

// FileKind tells a file's kind (FileStation, FileSequence or FileLimits) from its
// top-level keys, or "" when it is none of them. A file that is not valid YAML is
// told by a line scan, so that it still reaches its own loader and gets that
// loader's positioned syntax error; so is a file outside files.Check's bounds.
func FileKind(data []byte) string {
	var top map[string]any
	// A file outside the parser's bounds (files.Check) is told by the line scan
	// too: the YAML library would take too long and too much memory over it.
	if err := files.Check("", data); err != nil || yaml.Unmarshal(data, &top) != nil {
		for _, k := range []struct{ key, kind string }{{"station:", FileStation}, {"sequence:", FileSequence}, {"limit_set:", FileLimits}} {
			if bytes.HasPrefix(data, []byte(k.key)) || bytes.Contains(data, []byte("\n"+k.key)) {
				return k.kind
			}
		}
		return ""
	}
	switch {
	case top["station"] != nil:
		return FileStation
	case top["sequence"] != nil:
		return FileSequence
	case top["limit_set"] != nil:
		return FileLimits
	}
	return ""
}

// topKeys are the top-level keys that tell each kind of file.
var topKeys = map[string]string{FileStation: "station", FileSequence: "sequence", FileLimits: "limit_set"}

// kindNames are the kinds as a person reads them.
var kindNames = map[string]string{FileStation: "station file", FileSequence: "sequence file", FileLimits: "limit file"}

// wrongKind returns a positioned error when data is a file of another known kind
// than want (a sequence file given for the station file, say), else nil: the
// loader stops there rather than list every key of the other kind as unknown.
func wrongKind(doc *files.Doc, data []byte, want string) error {
	got := FileKind(data)
	if got == "" || got == want {
		return nil
	}
	return files.List{doc.KeyErrorf("$."+topKeys[got], "this is a %s (top-level key %s:), but a %s (top-level key %s:) was expected here: were the files given in each other's place?",
		kindNames[got], topKeys[got], kindNames[want], topKeys[want])}
}

// LimitsProduct returns the product a limit file names under limit_set.product,
// trimmed, or "" when data is no limit file or names none. It reads only that
// key: tools use it to find the product's steps before the file is loaded.
func LimitsProduct(data []byte) string {
	var top struct {
		LimitSet struct {
			Product any `yaml:"product"`
		} `yaml:"limit_set"`
	}
	if files.Check("", data) != nil || yaml.Unmarshal(data, &top) != nil {
		return ""
	}
	p, _ := top.LimitSet.Product.(string)
	return strings.TrimSpace(p)
}
