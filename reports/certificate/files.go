package certificate

import "trimline/reports/internal/pdfdoc"

// filesInForce lists the station, sequence and limit files with their hashes.
func (d *doc) filesInForce() {
	cols := []pdfdoc.Column{
		{Title: "Kind", W: 17, Align: "L"},
		{Title: "Name", W: 31, Align: "L"},
		{Title: "Title", W: 44, Align: "L"},
		{Title: "SHA-256", W: 88, Align: "L"},
	}
	var rows []pdfdoc.Row
	for _, f := range d.rec.Files {
		rows = append(rows, pdfdoc.Row{
			c1(dash(f.Kind), pdfdoc.Bold),
			c1(dash(f.Name), pdfdoc.Body),
			c1(dash(f.Title), pdfdoc.Body),
			c1(dash(f.SHA256), stMonoSmall),
		})
	}
	d.tableSection("Files in force", cols, rows, nil)
}
