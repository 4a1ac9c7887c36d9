package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/limits"
	"trimline/sequencer"
)

// decodeStrict decodes one JSON object of line into v, refusing a field v does
// not have: the documented types are the whole schema.
func decodeStrict(t *testing.T, line string, v any) {
	t.Helper()
	d := json.NewDecoder(strings.NewReader(line))
	d.DisallowUnknownFields()
	if err := d.Decode(v); err != nil {
		t.Fatalf("%T: %v\n%s", v, err, line)
	}
}

// jsonLines splits out into its lines, each of which must be one JSON object.
func jsonLines(t *testing.T, out string) []string {
	t.Helper()
	var lines []string
	sc := bufio.NewScanner(strings.NewReader(out))
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		if !json.Valid(sc.Bytes()) {
			t.Fatalf("not a JSON line: %s", sc.Text())
		}
		lines = append(lines, sc.Text())
	}
	return lines
}

func TestRunCheckVerifyJSON(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	serials := []string{"BRX-00001", "BRX-00002", "BRX-00003"}
	args := []string{"run", "--station", station, "--sequence", sequence, "--out", dir, "--operator", "J. Doe", "--json"}
	for _, s := range serials {
		args = append(args, "--serial", s)
	}
	code, out, errOut := runCLI(t, args...)
	if code != exitPass || errOut != "" {
		t.Fatalf("run: exit %d, stderr %q\n%s", code, errOut, out)
	}
	lines := jsonLines(t, out)
	if len(lines) != len(serials)+1 {
		t.Fatalf("%d lines, want a unit per serial and a summary:\n%s", len(lines), out)
	}
	var pdf string
	for i, s := range serials {
		var u unitOut
		decodeStrict(t, lines[i], &u)
		if u.Kind != kindUnit || u.Version != jsonVersion || u.Serial != s || u.Verdict != "PASS" || u.Product != "BRX-200" ||
			u.Revision == "" || u.Operator != "J. Doe" || u.Certificate == "" {
			t.Errorf("unit %d: %+v", i, u)
		}
		if _, err := os.Stat(u.CertificatePDF); err != nil || !strings.Contains(u.CertificatePDF, u.Certificate) {
			t.Errorf("unit %s: certificate_pdf %q: %v", s, u.CertificatePDF, err)
		}
		pdf = u.CertificatePDF
		var found bool
		for _, r := range u.Results {
			if r.Name != "post_offset" {
				continue
			}
			found = true
			if r.Unit != "V" || r.Stage != "as_left" || r.Value == nil || r.ExpandedUncertainty == nil || r.CoverageFactor == nil ||
				!(*r.ExpandedUncertainty > 0) || !(*r.CoverageFactor >= 1) || len(r.JudgedBy) != 1 ||
				!r.JudgedBy[0].Pass || r.JudgedBy[0].Zone == "" {
				t.Errorf("unit %s post_offset: %+v", s, r)
			}
		}
		if !found || len(u.Limits) == 0 || len(u.TrimCodes) == 0 {
			t.Errorf("unit %s: post_offset %v, %d limits, %d trim codes", s, found, len(u.Limits), len(u.TrimCodes))
		}
	}
	var sum summaryOut
	decodeStrict(t, lines[len(lines)-1], &sum)
	if sum.Kind != kindSummary || sum.Units != 3 || sum.Passed != 3 || sum.Yield == nil || *sum.Yield != 1 {
		t.Errorf("summary %+v", sum)
	}

	code, out, errOut = runCLI(t, "check", "--json", station, sequence)
	if code != exitPass || errOut != "" {
		t.Fatalf("check: exit %d, stderr %q\n%s", code, errOut, out)
	}
	var chk checkOut
	decodeStrict(t, out, &chk)
	if !chk.OK || len(chk.Files) != 2 || !chk.Files[0].OK || len(chk.TUR) == 0 || chk.Errors != 0 {
		t.Errorf("check %+v", chk)
	}

	code, out, errOut = runCLI(t, "audit", "verify", "--json", pdf, "--keys", filepath.Join(dir, "keys"))
	if code != exitPass || errOut != "" {
		t.Fatalf("audit verify: exit %d, stderr %q\n%s", code, errOut, out)
	}
	var v verificationOut
	decodeStrict(t, out, &v)
	if v.Kind != kindVerification || v.Verdict != "GENUINE" || len(v.Reasons) == 0 || v.SealOnly || v.Ledger == "" ||
		v.Serial != serials[len(serials)-1] || !strings.Contains(pdf, v.Certificate+"_") || v.RunID == "" || v.SupersededBy != "" {
		t.Errorf("verify %+v", v)
	}
	// The demo's bench is simulated: a genuine document of it still says so.
	if v.Simulated != "SIMULATED BENCH — NOT A MEASUREMENT" {
		t.Errorf("verify of a simulated run: simulated %q, want the record's mark", v.Simulated)
	}
}

func TestJSONBadInput(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	// A sequence file with a problem in a known place: a run refuses it with
	// exit 2 and the problem, positioned, on stderr; check reports it on stdout.
	data, err := os.ReadFile(sequence)
	if err != nil {
		t.Fatal(err)
	}
	bad := filepath.Join(dir, "bad-sequence.yaml")
	os.WriteFile(bad, append(data, []byte("\nno_such_key: 1\n")...), 0o644)
	code, out, errOut := runCLI(t, "run", "--json", "--station", station, "--sequence", bad, "--serial", "BRX-00001", "--out", dir)
	if code != exitUsage || out != "" {
		t.Fatalf("run: exit %d, stdout %q", code, out)
	}
	lines := jsonLines(t, errOut)
	if len(lines) != 1 {
		t.Fatalf("stderr is not one object:\n%s", errOut)
	}
	var e errorOut
	decodeStrict(t, lines[0], &e)
	if e.Kind != kindError || e.ExitCode != exitUsage || e.Command != "run" || len(e.Problems) == 0 ||
		e.Problems[0].File != bad || e.Problems[0].Line == 0 || e.Error != "1 problem(s)" {
		t.Errorf("error %+v", e)
	}
	code, out, _ = runCLI(t, "check", "--json", bad)
	var chk checkOut
	decodeStrict(t, out, &chk)
	if code != exitUsage || chk.OK || chk.Errors == 0 || chk.Files[0].OK || chk.Problems[0].Line == 0 {
		t.Errorf("check: exit %d %+v", code, chk)
	}
	// A usage error is JSON too, with --json anywhere on the line.
	code, _, errOut = runCLI(t, "run", "--json", "--no-such-flag")
	decodeStrict(t, errOut, &e)
	if code != exitUsage || e.ExitCode != exitUsage {
		t.Errorf("usage: exit %d %+v", code, e)
	}
}

func TestHelpShowsJSON(t *testing.T) {
	for _, c := range [][]string{{"help", "run"}, {"help", "check"}, {"help", "audit", "verify"}, {"help", "fit"}, {"help", "stats"}} {
		_, out, _ := runCLI(t, c...)
		if !strings.Contains(out, "-json") || !bytes.Contains([]byte(out), []byte("Output for scripts")) {
			t.Errorf("%v does not show --json:\n%s", c, out)
		}
	}
}

// TestReadmeJSONExamples decodes every json block of README's "Output for
// scripts" into the type its kind names, with unknown fields refused, and
// checks that every kind has an example: the documentation and jsonout.go
// cannot drift apart.
func TestReadmeJSONExamples(t *testing.T) {
	readme, err := os.ReadFile(filepath.Join("..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	_, section, ok := bytes.Cut(readme, []byte("\n## Output for scripts\n"))
	if !ok {
		t.Fatal(`README has no section "Output for scripts"`)
	}
	if i := bytes.Index(section, []byte("\n## ")); i >= 0 {
		section = section[:i]
	}
	types := map[string]func() any{
		kindUnit:         func() any { return new(unitOut) },
		kindSummary:      func() any { return new(summaryOut) },
		kindCheck:        func() any { return new(checkOut) },
		kindVerification: func() any { return new(verificationOut) },
		kindError:        func() any { return new(errorOut) },
		kindStats:        func() any { return new(statsOut) },
		kindPlan:         func() any { return new(planOut) },
	}
	seen := map[string]bool{}
	blocks := strings.Split(string(section), "```json\n")
	for _, b := range blocks[1:] {
		block, _, _ := strings.Cut(b, "```")
		var head struct {
			Kind    string `json:"kind"`
			Version int    `json:"version"`
		}
		if err := json.Unmarshal([]byte(block), &head); err != nil {
			t.Fatalf("README example: %v\n%s", err, block)
		}
		newT, ok := types[head.Kind]
		if !ok || head.Version != jsonVersion {
			t.Errorf("README example of kind %q version %d: no such kind or version", head.Kind, head.Version)
			continue
		}
		decodeStrict(t, block, newT())
		seen[head.Kind] = true
	}
	for k := range types {
		if !seen[k] {
			t.Errorf("README's Output for scripts has no example of a %q object", k)
		}
	}
}

// A unit of two channels: each result and limit names its channel, a limit of
// a channel judges only that channel's result, and the coefficients and
// re-trim passes are listed; a record without them leaves both keys out.
func TestUnitJSONChannelsCoefficientsRetrims(t *testing.T) {
	rec := &sequencer.Record{Serial: "LT4-1", ResponseUnit: "A", Verdict: sequencer.Pass,
		Results: []sequencer.Result{
			{Name: "post_offset", Channel: "1", Stage: sequencer.AsLeft, Value: 0.5e-6, Unit: "A", Valid: true},
			{Name: "post_offset", Channel: "2", Stage: sequencer.AsLeft, Value: 0.7e-6, Unit: "A", Valid: true},
		},
		Outcomes: []limits.Outcome{
			{Name: "offset after", Channel: "1", Uses: []string{"post_offset"}, Pass: true},
			{Name: "offset after", Channel: "2", Uses: []string{"post_offset"}, Pass: false, Reason: "too large"},
		},
		Trims: []sequencer.TrimCode{{Channel: "2", DAC: "offset", Code: 2110, Written: true}},
		Coefficients: []sequencer.CoefficientWrite{{Name: "offset", Channel: "2", Adjusts: "offset", Format: "int16 decimal", Unit: "mA",
			Ideal: -0.01304, IdealU: 0.6e-3, Value: -0.0130, Text: "-130", Resolution: 1e-4, Written: true, Readback: "0", Match: false}},
		Retrims: []sequencer.RetrimPass{{Step: "fine offset", DAC: "offset", Channel: "2", Pass: 1, Code: 2110, Error: 2.4e-6, ErrorU: 0.2e-6,
			Sensitivity: 1.2e-6, Next: 2108}},
	}
	var buf bytes.Buffer
	writeJSON(&buf, newUnitOut(rec, "", ""))
	var u unitOut
	decodeStrict(t, buf.String(), &u)
	if len(u.Results) != 2 || u.Results[1].Channel != "2" || len(u.Results[1].JudgedBy) != 1 || u.Results[1].JudgedBy[0].Pass {
		t.Errorf("results: %+v", u.Results)
	}
	if len(u.Limits) != 2 || u.Limits[0].Channel != "1" || u.TrimCodes[0].Channel != "2" {
		t.Errorf("limits %+v, trims %+v", u.Limits, u.TrimCodes)
	}
	c := u.Coefficients
	if len(c) != 1 || c[0].Channel != "2" || c[0].Text != "-130" || c[0].Readback != "0" || c[0].Match || c[0].Unit != "mA" ||
		c[0].Value == nil || *c[0].Value != -0.0130 || c[0].StandardUncertainty == nil || *c[0].StandardUncertainty != 0.6e-3 {
		t.Errorf("coefficients: %+v", c)
	}
	p := u.Retrims
	if len(p) != 1 || p[0].Unit != "A" || p[0].Error == nil || *p[0].Error != 2.4e-6 || p[0].Next != 2108 || p[0].Within {
		t.Errorf("retrims: %+v", p)
	}
	line := buf.String()
	for _, k := range []string{`"channel":"2"`, `"coefficients":[`, `"retrims":[`} {
		if !strings.Contains(line, k) {
			t.Errorf("the line lacks %s:\n%s", k, line)
		}
	}

	// One channel, no coefficients, no re-trim: none of the new keys.
	buf.Reset()
	writeJSON(&buf, newUnitOut(&sequencer.Record{Results: []sequencer.Result{{Name: "post_offset", Unit: "V", Valid: true}}}, "", ""))
	for _, k := range []string{`"channel"`, `"coefficients"`, `"retrims"`} {
		if strings.Contains(buf.String(), k) {
			t.Errorf("a one-channel unit has %s:\n%s", k, buf.String())
		}
	}
}

// TestUnitJSONChannels: a per-channel result, outcome and trim code carry their
// channel, judged_by names only the outcomes of the result's own channel, and a
// one-channel unit's objects have no channel key at all (so scripts written for
// them read the same bytes).
func TestUnitJSONChannels(t *testing.T) {
	rec := &sequencer.Record{Serial: "TRI-00001", Verdict: sequencer.Fail,
		Results: []sequencer.Result{
			{Name: "pre_offset", Channel: "1", Unit: "V", Valid: true, Value: 1e-3},
			{Name: "pre_offset", Channel: "2", Unit: "V", Valid: true, Value: -2e-3},
			{Name: "supply", Unit: "V", Valid: true, Value: 1},
		},
		Outcomes: []limits.Outcome{
			{Name: "untrimmed", Channel: "1", Uses: []string{"pre_offset"}, Pass: true},
			{Name: "untrimmed", Channel: "2", Uses: []string{"pre_offset"}, Pass: false},
			{Name: "supply", Uses: []string{"supply"}, Pass: true},
		},
		Trims: []sequencer.TrimCode{{DAC: "offset", Channel: "2", Code: 200}},
	}
	b, err := json.Marshal(newUnitOut(rec, "", ""))
	if err != nil {
		t.Fatal(err)
	}
	var u unitOut
	decodeStrict(t, string(b), &u)
	if u.Results[1].Channel != "2" || len(u.Results[1].JudgedBy) != 1 || u.Results[1].JudgedBy[0].Channel != "2" || u.Results[1].JudgedBy[0].Pass {
		t.Errorf("channel 2's result: %+v", u.Results[1])
	}
	if u.Limits[1].Channel != "2" || u.TrimCodes[0].Channel != "2" {
		t.Errorf("limits %+v, trims %+v", u.Limits, u.TrimCodes)
	}
	one := &sequencer.Record{Serial: "BRX-00001", Verdict: sequencer.Pass,
		Results:  []sequencer.Result{{Name: "post_offset", Unit: "V", Valid: true}},
		Outcomes: []limits.Outcome{{Name: "offset", Uses: []string{"post_offset"}, Pass: true}},
		Trims:    []sequencer.TrimCode{{DAC: "offset"}}}
	if b, _ := json.Marshal(newUnitOut(one, "", "")); bytes.Contains(b, []byte(`"channel"`)) {
		t.Errorf("a one-channel unit's JSON has a channel key: %s", b)
	}
}
