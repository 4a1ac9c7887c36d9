package sequencer

// Person is one entry of a station file's people: who may work at the station
// and what they may do.
type Person struct {
	Name  string   // as certificates and the audit trail print it
	Badge string   // what the badge scanner types; "" = sign in by name
	May   []string // rights: RightOperate, RightReview
	// Passphrase is a hashed passphrase (never plaintext), checked by
	// CheckPassphrase; Key is the path of an Ed25519 public key file. Either
	// one lets the person sign in on a console served beyond loopback.
	Passphrase string
	Key        string
	Where      string // file:line:col of the entry
}

// The rights a Person may hold.
const (
	RightOperate = "operate" // sign in, run units, clear a station fault
	RightReview  = "review"  // accept or reject units held for REVIEW
)
