package signing

// ApproverDir reads a folder of approvers' public keys, as a station's
// release_keys names it: every NAME.pub in dir is the key of the approver named
// NAME, who may release files and void certificates. No station key is bound. The
// folder must not be writable by group or others (ErrUnsafeKeyFolder). A trust
// file (LoadTrust) names approvers with their full names and what each may sign.
func ApproverDir(dir string) (*Trust, error) {
	t := newTrust("release keys " + dir)
	if err := t.addApproverDir(dir); err != nil {
		return nil, err
	}
	return t, nil
}
