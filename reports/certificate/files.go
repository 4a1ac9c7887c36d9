package certificate

// filesInForce lists the station, sequence and limit files with their hashes.
func (d *doc) filesInForce() {
	cols := []column{
		{title: "Kind", w: 17, align: "L"},
		{title: "Name", w: 31, align: "L"},
		{title: "Title", w: 44, align: "L"},
		{title: "SHA-256", w: 88, align: "L"},
	}
	var rows []row
	for _, f := range d.rec.Files {
		rows = append(rows, row{
			c1(dash(f.Kind), stBold),
			c1(dash(f.Name), stBody),
			c1(dash(f.Title), stBody),
			c1(dash(f.SHA256), stMonoSmall),
		})
	}
	d.heading("Files in force", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
}
