package sequencer

import "trimline/instruments/files"

// decodeAll decodes doc into v strictly and reports every problem at once
// (files.Doc.DecodeAll): a bad unit in one place does not hide an unknown key in
// another. The loader goes on with its own checks on what did decode.
func decodeAll(doc *files.Doc, v any) files.List {
	err := doc.DecodeAll(v)
	if err == nil {
		return nil
	}
	if fe := files.Errs(err); fe != nil {
		return fe
	}
	return files.List{{File: doc.Name, Msg: err.Error()}}
}

// withDecodeErrs returns the decoding problems dec and the loader's own problems,
// leaving out those at the very place (line and column) a decoding problem points
// at: a value that did not decode is zero, and the loader's complaint about that
// zero would only repeat it. Another problem on the same line (a flow mapping
// holds a whole step) is kept.
func withDecodeErrs(dec, own files.List) files.List {
	if len(dec) == 0 {
		return own
	}
	type at struct {
		file      string
		line, col int
	}
	bad := map[at]bool{}
	for _, e := range dec {
		bad[at{e.File, e.Line, e.Col}] = true
	}
	out := append(files.List(nil), dec...)
	for _, e := range own {
		if e.Line == 0 || !bad[at{e.File, e.Line, e.Col}] {
			out = append(out, e)
		}
	}
	return out
}
