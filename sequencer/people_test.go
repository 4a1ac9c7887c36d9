package sequencer_test

import (
	"crypto/pbkdf2"
	"crypto/sha256"
	"encoding/base64"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// stationWithPeople is the demo station file with its people: list replaced by
// people (YAML for the list's entries, each line indented by two spaces).
func stationWithPeople(t *testing.T, people string) (string, int) {
	t.Helper()
	s := demoFile(t, "brx200-station.yaml")
	i := strings.Index(s, "\npeople:")
	if i < 0 {
		t.Fatal("the demo station lists no people")
	}
	s = s[:i] + "\npeople:\n"
	return s + people, strings.Count(s, "\n") + 1 // the line of the first entry
}

func TestDemoStationPeople(t *testing.T) {
	st, err := sequencer.ParseStation("/lines/one/brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	if len(st.People) < 2 {
		t.Fatalf("people %+v, want an operator and a reviewer", st.People)
	}
	op, ok := st.Person("B-1042")
	if !ok || !op.Can(sequencer.RightOperate) || op.Can(sequencer.RightReview) {
		t.Errorf("badge B-1042: %+v %v, want an operator who does not review", op, ok)
	}
	rev, ok := st.Person(" Tobias Wrenhollow ") // by name, as typed
	if !ok || !rev.Can(sequencer.RightReview) || rev.Key != filepath.Join("/lines/one", "keys/people/tobias-wrenhollow.pub") {
		t.Errorf("reviewer %+v %v: want the review right and a key resolved beside the station file", rev, ok)
	}
	if !strings.HasPrefix(rev.Where, "/lines/one/brx200-station.yaml:") {
		t.Errorf("where %q", rev.Where)
	}
	for _, id := range []string{"", "b-1042", "Ada", "nobody"} {
		if p, ok := st.Person(id); ok {
			t.Errorf("Person(%q) = %+v: ids match exactly", id, p)
		}
	}
}

// A badge is matched before a name, so that a badge id can never sign in as
// someone else by being their name; the loader refuses a badge that is a name.
func TestPersonBadgeBeforeName(t *testing.T) {
	st := &sequencer.Station{People: []sequencer.Person{{Name: "7", May: []string{"operate"}}, {Name: "Lin", Badge: "7", May: []string{"review"}}}}
	if p, _ := st.Person("7"); p.Name != "Lin" {
		t.Errorf("Person(7) = %q, want the badge's owner", p.Name)
	}
}

func TestPeopleRefused(t *testing.T) {
	hash, err := sequencer.HashPassphrase("correct horse battery staple")
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name, people string
		line         int // of the problem, counted from the first entry (0)
		want         string
	}{
		{"plaintext passphrase", "  - {name: A, may: [operate], passphrase: hunter2}\n", 0, "trimline keys passphrase"},
		{"weak hash", "  - {name: A, may: [operate], passphrase: \"pbkdf2-sha256$1000$" + strings.Repeat("A", 22) + "$" + strings.Repeat("A", 43) + "\"}\n", 0, "iterations"},
		{"duplicate name", "  - {name: A, may: [operate]}\n  - {name: A, may: [review]}\n", 1, `"A" is listed already`},
		{"duplicate badge", "  - {name: A, badge: \"7\", may: [operate]}\n  - {name: B, badge: \"7\", may: [review]}\n", 1, `badge "7" is A's already`},
		{"badge that is a name", "  - {name: A, may: [operate]}\n  - {name: B, badge: A, may: [review]}\n", 1, "may not be someone's name"},
		{"unknown right", "  - {name: A, may: [operate, approve]}\n", 0, `unknown right "approve"`},
		{"no rights", "  - {name: A, may: []}\n", 0, "at least one right"},
		{"missing may", "  - {name: A}\n", 0, `missing required key "may"`},
		{"missing name", "  - {may: [operate]}\n", 0, `missing required key "name"`},
		{"control character", "  - {name: \"A\\u0007\", may: [operate]}\n", 0, "control characters"},
		{"unknown key", "  - {name: A, may: [operate], role: boss}\n", 0, `unknown field "role"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			text, first := stationWithPeople(t, c.people)
			_, err := sequencer.ParseStation("st.yaml", []byte(text))
			errs := files.Errs(err)
			if len(errs) != 1 || !strings.Contains(errs[0].Msg, c.want) || errs[0].Line != first+c.line {
				t.Errorf("got %v, want one problem on line %d saying %q", err, first+c.line, c.want)
			}
		})
	}
	text, _ := stationWithPeople(t, fmt.Sprintf("  - {name: A, badge: \"7\", may: [operate, review], passphrase: %q}\n", hash))
	st, err := sequencer.ParseStation("st.yaml", []byte(text))
	if err != nil {
		t.Fatalf("a hashed passphrase: %v", err)
	}
	p, _ := st.Person("7")
	if !p.CheckPassphrase("correct horse battery staple") || p.CheckPassphrase("correct horse battery stapl") || p.CheckPassphrase("") {
		t.Error("CheckPassphrase does not tell the passphrase from others")
	}
}

// The hash is PBKDF2-HMAC-SHA-256 (RFC 8018 §5.2) at 600 000 iterations with a
// 16-byte random salt, written scheme$iterations$salt$hash: recomputed here from
// its parts with the standard library.
func TestHashPassphraseFormat(t *testing.T) {
	h1, err := sequencer.HashPassphrase("line one")
	if err != nil {
		t.Fatal(err)
	}
	h2, _ := sequencer.HashPassphrase("line one")
	if h1 == h2 {
		t.Error("two hashes of one passphrase are equal: the salt is not random")
	}
	parts := strings.Split(h1, "$")
	if len(parts) != 4 || parts[0] != "pbkdf2-sha256" || parts[1] != "600000" {
		t.Fatalf("hash %q", h1)
	}
	salt, err1 := base64.RawStdEncoding.DecodeString(parts[2])
	sum, err2 := base64.RawStdEncoding.DecodeString(parts[3])
	if err1 != nil || err2 != nil || len(salt) != 16 || len(sum) != 32 {
		t.Fatalf("salt %d bytes, hash %d bytes (%v %v)", len(salt), len(sum), err1, err2)
	}
	want, _ := pbkdf2.Key(sha256.New, "line one", salt, 600000, 32)
	if string(want) != string(sum) {
		t.Error("the hash is not PBKDF2-HMAC-SHA-256 of the passphrase and salt")
	}
	if !(sequencer.Person{Passphrase: h1}).CheckPassphrase("line one") || (sequencer.Person{}).CheckPassphrase("") {
		t.Error("CheckPassphrase")
	}
	for _, bad := range []string{"", "a\nb", strings.Repeat("x", sequencer.MaxPassphrase+1)} {
		if _, err := sequencer.HashPassphrase(bad); err == nil {
			t.Errorf("HashPassphrase(%.10q) made a hash", bad)
		}
	}
}

func TestRetestKey(t *testing.T) {
	_, seq := demoFiles(t, nil)
	if seq.MaxAttempts != 3 {
		t.Errorf("the demo sequence allows %d attempts, want 3", seq.MaxAttempts)
	}
	base := demoFile(t, "brx200-sequence.yaml")
	i := strings.Index(base, "\nretest:")
	if i < 0 {
		t.Fatal("no retest: block in the demo sequence")
	}
	j := strings.Index(base[i+1:], "\n") // the key is one line
	cases := []struct{ block, want string }{
		{"retest: {max_attempts: 0}", "expected 1 to 20"},
		{"retest: {max_attempts: 21}", "expected 1 to 20"},
		{"retest: {max_attempts: three}", "expected a whole number"},
		{"retest: {}", `missing required key "max_attempts"`},
		{"retest: {max_attempts: 2, after: rework}", `unknown field "after"`},
	}
	for _, c := range cases {
		text := base[:i+1] + c.block + base[i+1+j:]
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(text), demoReader(t, nil))
		errs := files.Errs(err)
		if len(errs) != 1 || !strings.Contains(errs[0].Msg, c.want) || errs[0].Line != strings.Count(base[:i+1], "\n")+1 {
			t.Errorf("%s: %v, want one problem on its line saying %q", c.block, err, c.want)
		}
	}
	text := base[:i+1] + "retest: {max_attempts: 1}" + base[i+1+j:]
	if seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(text), demoReader(t, nil)); err != nil || seq.MaxAttempts != 1 {
		t.Errorf("max_attempts 1: %v", err)
	}
}
