package ledger

import (
	"bufio"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io"
	"maps"
	"slices"
	"strconv"
	"strings"
)

// A chain's head, kept outside the ledger, anchors it: a ledger rebuilt from
// scratch, or rewritten from some run on with every hash after it recomputed,
// verifies on its own, but no longer has the saved head at its place.

// Head is the end of one chain at some moment: a station's chain of runs or the
// audit trail.
type Head struct {
	// Station is the station of a run chain; "" for the audit trail.
	Station string
	// Seq is the position of the head: the chain_seq of the station's run (its
	// number of runs then), or the audit trail entry's seq.
	Seq int64
	// Hash is that run's chain_hash or that entry's hash (lowercase hex).
	Hash string
}

// Chain names the chain in words: "station EOL-2" or "audit trail".
func (h Head) Chain() string {
	if h.Station == "" {
		return auditTrailChain
	}
	return "station " + h.Station
}

const auditTrailChain = "audit trail"

// HeadsFormat is the first line of a heads file.
const HeadsFormat = "# trimline chain heads v1"

// FormatHeads writes heads as a heads file: the line HeadsFormat, then one line
// per chain, "HASH SEQ CHAIN", where CHAIN is "station " + the station id or
// "audit trail", e.g.
//
//	# trimline chain heads v1
//	3f9a…64 hex digits… 17 station EOL-2
//	a1c0…64 hex digits… 153 audit trail
//
// comment lines start with '#'. ParseHeads reads it back.
func FormatHeads(w io.Writer, heads []Head) error {
	var b strings.Builder
	b.WriteString(HeadsFormat + "\n")
	for _, h := range heads {
		fmt.Fprintf(&b, "%s %d %s\n", h.Hash, h.Seq, h.Chain())
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// MaxHeadsFile bounds what ParseHeads reads: a line per station.
const MaxHeadsFile = 1 << 20

// ParseHeads reads a heads file written by FormatHeads (blank lines, '#' comments
// and CR line ends are allowed). Each problem is an error that names its line.
func ParseHeads(r io.Reader) ([]Head, error) {
	sc := bufio.NewScanner(io.LimitReader(r, MaxHeadsFile))
	var heads []Head
	seen := map[string]bool{}
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSuffix(sc.Text(), "\r")
		if strings.TrimSpace(line) == "" || strings.HasPrefix(line, "#") {
			continue
		}
		bad := func(format string, args ...any) error {
			return fmt.Errorf("heads file line %d: %s: %w", n, fmt.Sprintf(format, args...), ErrInvalid)
		}
		hash, rest, ok1 := strings.Cut(line, " ")
		seqText, chain, ok2 := strings.Cut(rest, " ")
		if !ok1 || !ok2 {
			return nil, bad("want HASH SEQ CHAIN, got %q", line)
		}
		if !isSHA256Hex(hash) {
			return nil, bad("%q is not a SHA-256 in lowercase hex", hash)
		}
		seq, err := strconv.ParseInt(seqText, 10, 64)
		if err != nil || seq < 1 {
			return nil, bad("position %q is not a whole number from 1 on", seqText)
		}
		h := Head{Seq: seq, Hash: hash}
		switch {
		case chain == auditTrailChain:
		case strings.HasPrefix(chain, "station ") && len(chain) > len("station "):
			h.Station = strings.TrimPrefix(chain, "station ")
		default:
			return nil, bad("chain %q is neither \"station ID\" nor %q", chain, auditTrailChain)
		}
		if seen[h.Chain()] {
			return nil, bad("%s is given twice", h.Chain())
		}
		seen[h.Chain()] = true
		heads = append(heads, h)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("heads file: %w", err)
	}
	if len(heads) == 0 {
		return nil, fmt.Errorf("heads file: no heads in it: %w", ErrInvalid)
	}
	return heads, nil
}

// HeadList is the report's heads as Heads: every station walked, in order of
// station id, then the audit trail (when it has entries).
func (r ChainReport) HeadList() []Head {
	var out []Head
	for _, st := range slices.Sorted(maps.Keys(r.Heads)) {
		out = append(out, Head{Station: st, Seq: r.HeadSeqs[st], Hash: r.Heads[st]})
	}
	if r.AuditHead != "" {
		out = append(out, Head{Seq: int64(r.AuditEntries), Hash: r.AuditHead})
	}
	return out
}

// HeadCheck is CheckHeads' finding for one saved head.
type HeadCheck struct {
	Head
	// Found: the chain has the saved hash at the saved position, so it has only
	// grown since (every link covers the one before it; VerifyChain checks that).
	Found bool
	// Now is the chain's current length: its last run's chain_seq, or the audit
	// trail's last seq; 0 when the chain has nothing.
	Now int64
	// Why says what is wrong when not Found.
	Why string
}

// CheckHeads looks up each saved head in the ledger: the run of its station at
// its position (or the audit trail entry at its seq) must have its hash. A saved
// head that is not found means the chain was rebuilt or rewritten after the
// heads were saved (or they were saved from another ledger). It proves the chain
// grew only from that head if the chain itself verifies: run VerifyChain too.
// Errors are failures to read.
func (l *Ledger) CheckHeads(ctx context.Context, saved []Head) ([]HeadCheck, error) {
	out := make([]HeadCheck, 0, len(saved))
	err := l.readTx(ctx, func(tx *sql.Tx) error {
		out = out[:0]
		for _, h := range saved {
			c := HeadCheck{Head: h}
			var at sql.NullString
			var err error
			if h.Station == "" {
				err = tx.QueryRowContext(ctx, `SELECT coalesce(max(seq), 0), (SELECT hash FROM audit_trail WHERE seq = ?) FROM audit_trail`, h.Seq).Scan(&c.Now, &at)
			} else {
				err = tx.QueryRowContext(ctx, `SELECT coalesce(max(chain_seq), 0), (SELECT chain_hash FROM runs WHERE station = ?1 AND chain_seq = ?2) FROM runs WHERE station = ?1`,
					h.Station, h.Seq).Scan(&c.Now, &at)
			}
			if err != nil && !errors.Is(err, sql.ErrNoRows) {
				return fmt.Errorf("%s: %w", h.Chain(), err)
			}
			what := "run"
			if h.Station == "" {
				what = "entry"
			}
			switch {
			case c.Now == 0:
				c.Why = fmt.Sprintf("%s: the ledger has no such chain; the saved head is %s %d, %s", h.Chain(), what, h.Seq, h.Hash)
			case c.Now < h.Seq:
				c.Why = fmt.Sprintf("%s: the chain has %d, the saved head is %s %d (%s): it was cut back or rebuilt", h.Chain(), c.Now, what, h.Seq, h.Hash)
			case at.String != h.Hash:
				c.Why = fmt.Sprintf("%s: %s %d has hash %s, the saved head %s: the chain was rebuilt or rewritten", h.Chain(), what, h.Seq, at.String, h.Hash)
			default:
				c.Found = true
			}
			out = append(out, c)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: check heads: %w", err)
	}
	return out, nil
}

// FindHead returns the head whose hash is hash (lowercase hex): the run whose
// chain_hash it is (its station and chain_seq), or else the audit trail entry
// whose hash it is. ErrNotFound (wrapped) when neither has it; ErrInvalid when
// hash is not a SHA-256 in lowercase hex.
func (l *Ledger) FindHead(ctx context.Context, hash string) (Head, error) {
	if !isSHA256Hex(hash) {
		return Head{}, fmt.Errorf("ledger: find head: %q is not a SHA-256 in lowercase hex: %w", hash, ErrInvalid)
	}
	h := Head{Hash: hash}
	err := l.db.QueryRowContext(ctx, `SELECT station, chain_seq FROM runs WHERE chain_hash = ?`, hash).Scan(&h.Station, &h.Seq)
	if errors.Is(err, sql.ErrNoRows) {
		h.Station = ""
		err = l.db.QueryRowContext(ctx, `SELECT seq FROM audit_trail WHERE hash = ?`, hash).Scan(&h.Seq)
	}
	if errors.Is(err, sql.ErrNoRows) {
		return Head{}, fmt.Errorf("ledger: find head: no run and no audit trail entry has hash %s: %w", hash, ErrNotFound)
	}
	if err != nil {
		return Head{}, fmt.Errorf("ledger: find head: %w", err)
	}
	return h, nil
}

// IsHeadHash reports whether s has the form of a head's hash: a SHA-256 in
// lowercase hex.
func IsHeadHash(s string) bool { return isSHA256Hex(s) }
