package stats_test

import (
	"bytes"
	"encoding/csv"
	"math"
	"slices"
	"strconv"
	"testing"
	"time"

	"trimline/reports/stats"
)

// readCSV parses b back: the header and the rows as maps by column.
func readCSV(t *testing.T, b []byte) (head []string, rows []map[string]string) {
	t.Helper()
	recs, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if err != nil {
		t.Fatalf("%v\n%s", err, b)
	}
	head = recs[0]
	for _, rec := range recs[1:] {
		m := map[string]string{}
		for i, c := range rec {
			m[head[i]] = c
		}
		rows = append(rows, m)
	}
	return head, rows
}

func TestWriteCSV(t *testing.T) {
	r := sample(t)
	var b bytes.Buffer
	if err := r.WriteCSV(&b); err != nil {
		t.Fatal(err)
	}
	head, rows := readCSV(t, b.Bytes())
	if !slices.Equal(head, stats.CSVColumns) {
		t.Errorf("header %q", head)
	}
	if len(rows) != len(r.Results) {
		t.Fatalf("%d rows, want one per result (%d)", len(rows), len(r.Results))
	}
	for i, s := range r.Results {
		row := rows[i]
		if row["name"] != s.Name || row["unit"] != s.Unit || row["stage"] != s.Stage || row["outside"] != strconv.Itoa(s.Outside) {
			t.Errorf("row %d: %v", i, row)
		}
		for col, want := range map[string]float64{"mean": s.Mean, "sd_within": s.SDWithin, "cpk_low": s.CpkCI[0], "fraction_outside": s.FractionOutside, "mean_U": s.MeanU} {
			got := row[col]
			if math.IsNaN(want) {
				if got != "" {
					t.Errorf("%s %s = %q, want an empty cell for NaN", s.Name, col, got)
				}
				continue
			}
			if v, err := strconv.ParseFloat(got, 64); err != nil || math.Abs(v-want) > 1e-14*math.Abs(want) {
				t.Errorf("%s %s = %q, want %v to 15 digits", s.Name, col, got, want)
			}
		}
	}
	post := rows[1]
	if post["lower"] != "-800" || post["upper"] != "800" || post["hist_over"] != "1" || post["hist_under"] != "0" {
		t.Errorf("post_offset's tolerance or overflow: %v", post)
	}
	if one := rows[2]; one["lower"] != "" || one["upper"] != "50" || one["cp"] != "" || one["invalid"] != "4" {
		t.Errorf("one-sided result: %v", one)
	}
}

func TestWriteValuesCSV(t *testing.T) {
	r := sample(t)
	// A unit with no valid value of post_offset: its cells are empty.
	r.Results[1].Values, r.Results[1].U, r.Results[1].Units = r.Results[1].Values[1:], r.Results[1].U[1:], r.Results[1].Units[1:]
	var b bytes.Buffer
	if err := r.WriteValuesCSV(&b); err != nil {
		t.Fatal(err)
	}
	head, rows := readCSV(t, b.Bytes())
	want := append(slices.Clone(stats.ValuesCSVColumns), "pre_offset [mV]", "pre_offset U [mV]", "post_offset [uV]", "post_offset U [uV]",
		"gain_drift [ppm]", "gain_drift U [ppm]")
	if !slices.Equal(head, want) {
		t.Errorf("header %q\nwant %q", head, want)
	}
	if len(rows) != len(r.Units) {
		t.Fatalf("%d rows, want one per unit (%d)", len(rows), len(r.Units))
	}
	first := rows[0]
	if first["serial"] != "BRX-00001" || first["post_offset [uV]"] != "" || first["pre_offset [mV]"] != "12.5" || first["pre_offset U [mV]"] != "0.1" {
		t.Errorf("first unit: %v", first)
	}
	if f, err := time.Parse(time.RFC3339, first["finished"]); err != nil || !f.Equal(r.Units[0].Finished) {
		t.Errorf("finished %q: %v", first["finished"], err)
	}
	// A value converted from SI units comes out as written.
	r.Results[0].U[1] = 100.00000000000001
	b.Reset()
	r.WriteValuesCSV(&b)
	_, rows = readCSV(t, b.Bytes())
	if got := rows[1]["pre_offset U [mV]"]; got != "100" {
		t.Errorf("U of 100.00000000000001 written %q, want 100", got)
	}
	if u := rows[4]; u["post_offset [uV]"] != "-42" || u["post_offset U [uV]"] != "" {
		t.Errorf("a value without U: %v", u)
	}
	if u := rows[1]; u["gain_drift [ppm]"] != "3" || u["site"] != "Harbor Road" || u["lot"] != "L7" {
		t.Errorf("unit 2: %v", u)
	}
	if u := rows[3]; u["attempts"] != "2" || u["first_verdict"] != "FAIL" || u["verdict"] != "PASS" {
		t.Errorf("retested unit: %v", u)
	}
}
