package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// ErrMergeConflict: the databases to merge disagree (a patient fact, a
// visit's recordings, the settings of an analysis); nothing was merged.
// The error is a *MergeConflictError listing every problem.
var ErrMergeConflict = errors.New("store: merge refused")

// MergeConflictError lists every problem that made Merge refuse.
type MergeConflictError struct {
	Problems []string // one line each, naming the patient or file
}

func (e *MergeConflictError) Error() string {
	return fmt.Sprintf("%v: %d problem(s), nothing merged: %s", ErrMergeConflict, len(e.Problems), strings.Join(e.Problems, "; "))
}

func (e *MergeConflictError) Is(target error) bool { return target == ErrMergeConflict }

// MergeOptions configure Merge.
type MergeOptions struct {
	// SettingsVersion and SettingsHash are the processing settings every
	// merged visit must have been analysed with (the program's current
	// ones). A part holding a visit analysed otherwise is refused.
	SettingsVersion, SettingsHash string
}

// MergeReport says what Merge did.
type MergeReport struct {
	Parts    int // databases read
	Patients int // patients added or completed (an empty field filled)
	Visits   int // visits added
	// Already counts the parts' visits the store held already (same patient,
	// date and recording files): merging the same part twice adds nothing.
	Already int
	// Duplicates are visits not added because another visit holds one of
	// their recording files (see Merge).
	Duplicates []MergeDuplicate
	Files      int // recording files copied into the data folder
	// PatientIDs are the store's IDs of the patients that gained a visit.
	PatientIDs []int64
}

// MergeDuplicate is a visit of a part that was not added because an
// earlier visit holds the same recording file.
type MergeDuplicate struct {
	Part   string // the part's file name
	Visit  string // "CODE DATE"
	Of     string // the visit kept: "CODE DATE"
	SHA256 string
}

// mergeVisit is one visit of a part, as the merge plans it.
type mergeVisit struct {
	part       int
	id         int64
	code, date string
	recs       []Recording
	shas       string // sorted SHA-256s joined by ",", the visit's identity beside code and date
}

// visitOwner is where a visit the merge keeps comes from.
type visitOwner struct {
	where      string // a file name
	code, date string
	shas       string
}

// Merge folds the patients and visits of the parts (databases made by
// sharded ingests, or any longwave databases) and their recording files into
// s, all at once or not at all:
//
//   - Patients are matched by code. A fact given in two places (sex, birth
//     year, birth date, group, cohort, follow-up interval) must agree; an
//     empty one is filled from the other, as UpsertPatient does.
//   - A visit is matched by patient code and date. One that s (or an
//     earlier part) holds with the same recording files is already merged
//     and skipped; one with other files is a conflict.
//   - Visits sharing a recording file (SHA-256) follow IngestBIDS's rule:
//     the earliest by date, then patient code, is kept and the others are
//     reported as Duplicates. Visits already in s come first whatever their
//     date (like files already stored at an ingest), so a merge never
//     removes a visit; the parts' visits are ordered among themselves, so
//     the order of parts does not matter.
//   - Every visit of every part must have been analysed with
//     opt.SettingsVersion and opt.SettingsHash (a part made by another
//     settings version is refused: reprocess it, or ingest it again).
//
// Conflicts are all collected and returned in one ErrMergeConflict before
// anything is written. The recording files of the new visits are then
// copied into s's data folder (PutRecording: checked against their SHA-256,
// renamed into place whole), and one transaction writes the patients and
// visits. A visit's rows are copied column by column as the schema lists
// them: the visit, and every row of every table that references it (or
// references such a row) through a foreign key, so columns added by later
// migrations are carried without this code knowing them. When anything
// fails, the transaction is rolled back and the files this merge created
// are removed again; a file left by a crash between copy and commit is
// unreferenced, harmless, and reused by a later merge or ingest of the same
// recording (see files.go).
func (s *Store) Merge(ctx context.Context, parts []*Store, opt MergeOptions) (MergeReport, error) {
	rep := MergeReport{Parts: len(parts)}
	if opt.SettingsVersion == "" || opt.SettingsHash == "" {
		return rep, fmt.Errorf("%w: merge without settings version and hash", ErrInvalid)
	}
	var problems []string
	names := make([]string, len(parts))
	for i, p := range parts {
		names[i] = filepath.Base(p.Path())
		problem, err := s.checkPart(ctx, p, opt)
		if err != nil {
			return rep, err
		}
		if problem != "" {
			problems = append(problems, problem)
		}
	}
	if len(problems) > 0 {
		return rep, mergeRefused(problems)
	}
	target := filepath.Base(s.Path())

	// Patients: the store's, then each part's, field by field.
	have, err := allPatients(ctx, s)
	if err != nil {
		return rep, err
	}
	merged := map[string]Patient{}
	from := map[string]map[string]string{} // code → field → file that gave it
	for code, p := range have {
		merged[code] = p
		from[code] = map[string]string{}
	}
	changed := map[string]bool{}
	for i, part := range parts {
		ps, err := allPatients(ctx, part)
		if err != nil {
			return rep, fmt.Errorf("store: merge %s: %w", names[i], err)
		}
		for _, code := range sortedKeys(ps) {
			p := ps[code]
			m, ok := merged[code]
			if !ok {
				merged[code], changed[code] = p, true
				from[code] = map[string]string{}
				for _, f := range patientFacts {
					from[code][f.name] = names[i]
				}
				continue
			}
			for _, f := range patientFacts {
				a, b := f.get(m), f.get(p)
				switch {
				case b == "" || a == b:
				case a == "":
					f.set(&m, p)
					from[code][f.name] = names[i]
					changed[code] = true
				default:
					where := from[code][f.name]
					if where == "" {
						where = target
					}
					problems = append(problems, fmt.Sprintf("patient %s: %s %s in %s, %s in %s", code, f.name, a, where, b, names[i]))
				}
			}
			merged[code] = m
		}
	}

	// Visits: those of s first, then the parts' by date, code, part.
	owners := map[string]visitOwner{} // code + "\x00" + date → owner
	byFile := map[string]visitOwner{} // SHA-256 → owner
	stored, err := mergeVisits(ctx, s, -1)
	if err != nil {
		return rep, err
	}
	for _, v := range stored {
		o := visitOwner{where: target, code: v.code, date: v.date, shas: v.shas}
		owners[v.code+"\x00"+v.date] = o
		for _, r := range v.recs {
			if _, ok := byFile[r.SHA256]; !ok {
				byFile[r.SHA256] = o
			}
		}
	}
	var incoming []mergeVisit
	for i, part := range parts {
		vs, err := mergeVisits(ctx, part, i)
		if err != nil {
			return rep, fmt.Errorf("store: merge %s: %w", names[i], err)
		}
		incoming = append(incoming, vs...)
	}
	sort.SliceStable(incoming, func(a, b int) bool {
		x, y := incoming[a], incoming[b]
		if x.date != y.date {
			return x.date < y.date
		}
		if x.code != y.code {
			return x.code < y.code
		}
		return x.part < y.part
	})
	var accepted []mergeVisit
	gained := map[string]bool{}
	for _, v := range incoming {
		key := v.code + "\x00" + v.date
		if o, ok := owners[key]; ok {
			if o.shas == v.shas {
				rep.Already++
			} else {
				problems = append(problems, fmt.Sprintf("patient %s on %s: %s holds other recording files than %s",
					v.code, v.date, names[v.part], o.where))
			}
			continue
		}
		dup := false
		for _, r := range v.recs {
			if o, ok := byFile[r.SHA256]; ok {
				rep.Duplicates = append(rep.Duplicates, MergeDuplicate{Part: names[v.part], Visit: v.code + " " + v.date,
					Of: o.code + " " + o.date, SHA256: r.SHA256})
				dup = true
				break
			}
		}
		if dup {
			continue
		}
		o := visitOwner{where: names[v.part], code: v.code, date: v.date, shas: v.shas}
		owners[key] = o
		for _, r := range v.recs {
			byFile[r.SHA256] = o
		}
		accepted = append(accepted, v)
		gained[v.code] = true
	}
	if len(problems) > 0 {
		return rep, mergeRefused(problems)
	}
	tree, err := s.visitTree(ctx)
	if err != nil {
		return rep, err
	}
	for i, part := range parts {
		if err := part.sameColumns(ctx, tree); err != nil {
			return rep, fmt.Errorf("store: merge %s: %w", names[i], err)
		}
	}

	// Files first, outside the transaction.
	var created []Recording
	removeCreated := func() {
		for _, r := range created {
			s.RemoveRecordingFile(context.Background(), r.SHA256, r.Format)
		}
	}
	for _, v := range accepted {
		for _, r := range v.recs {
			made, err := s.copyRecording(parts[v.part], r)
			if err != nil {
				removeCreated()
				return rep, fmt.Errorf("store: merge %s: patient %s on %s: %w", names[v.part], v.code, v.date, err)
			}
			if made {
				created = append(created, r)
				rep.Files++
			}
		}
	}

	err = s.inTx(ctx, func(tx *sql.Tx) error {
		ids := map[string]int64{}
		for _, code := range sortedKeys(merged) {
			if !changed[code] && !gained[code] {
				continue
			}
			if changed[code] {
				id, err := s.upsertPatient(ctx, tx, merged[code])
				if err != nil {
					return err
				}
				ids[code] = id
				rep.Patients++
				continue
			}
			var id int64
			if err := tx.QueryRowContext(ctx, `SELECT id FROM patients WHERE code = ?`, code).Scan(&id); err != nil {
				return fmt.Errorf("patient %s: %w", code, err)
			}
			ids[code] = id
		}
		c := newRowCopier(tx)
		defer c.close()
		for _, v := range accepted {
			if err := c.copy(ctx, parts[v.part], tree, "id", v.id, "patient_id", ids[v.code]); err != nil {
				return fmt.Errorf("%s: patient %s on %s: %w", names[v.part], v.code, v.date, err)
			}
			rep.Visits++
		}
		for _, code := range sortedKeys(gained) {
			rep.PatientIDs = append(rep.PatientIDs, ids[code])
		}
		return nil
	})
	if err != nil {
		removeCreated()
		rep.Patients, rep.Visits, rep.Files, rep.PatientIDs = 0, 0, 0, nil
		if errors.Is(err, ErrInvalid) {
			return rep, err
		}
		return rep, fmt.Errorf("store: merge: %w", err)
	}
	return rep, nil
}

// mergeRefused returns the problems as one error.
func mergeRefused(problems []string) error {
	return &MergeConflictError{Problems: problems}
}

// checkPart returns the problem that refuses a part ("" none): the store
// itself, another schema version, visits analysed with other settings.
func (s *Store) checkPart(ctx context.Context, p *Store, opt MergeOptions) (string, error) {
	name := filepath.Base(p.Path())
	a, errA := os.Stat(s.Path())
	b, errB := os.Stat(p.Path())
	if errA == nil && errB == nil && os.SameFile(a, b) {
		return name + " is the database merged into", nil
	}
	mine, err := s.SchemaVersion(ctx)
	if err != nil {
		return "", fmt.Errorf("store: merge: %w", err)
	}
	theirs, err := p.SchemaVersion(ctx)
	if err != nil {
		return "", fmt.Errorf("store: merge %s: %w", name, err)
	}
	if mine != theirs {
		return fmt.Sprintf("%s has schema version %d, the database merged into %d", name, theirs, mine), nil
	}
	other, err := p.VisitsWithOtherSettings(ctx, opt.SettingsVersion, opt.SettingsHash)
	if err != nil {
		return "", fmt.Errorf("store: merge %s: %w", name, err)
	}
	if len(other) > 0 {
		return fmt.Sprintf("%s holds %d visit(s) not analysed with settings %s (hash %s…); "+
			"run longwave reprocess on it, or ingest its shard again, with this longwave",
			name, len(other), opt.SettingsVersion, opt.SettingsHash[:min(12, len(opt.SettingsHash))]), nil
	}
	return "", nil
}

// patientFacts are the fields of a patient two databases must agree on.
var patientFacts = []struct {
	name string
	get  func(Patient) string
	set  func(dst *Patient, src Patient)
}{
	{"sex", func(p Patient) string { return p.Sex }, func(d *Patient, s Patient) { d.Sex = s.Sex }},
	{"birth year", func(p Patient) string { return intOrEmpty(p.BirthYear) }, func(d *Patient, s Patient) { d.BirthYear = s.BirthYear }},
	{"birth date", func(p Patient) string { return p.BirthDate }, func(d *Patient, s Patient) { d.BirthDate = s.BirthDate }},
	{"group", func(p Patient) string { return p.Group }, func(d *Patient, s Patient) { d.Group = s.Group }},
	{"cohort", func(p Patient) string { return p.Cohort }, func(d *Patient, s Patient) { d.Cohort = s.Cohort }},
	{"follow-up months", func(p Patient) string { return intOrEmpty(p.FollowUpMonths) },
		func(d *Patient, s Patient) { d.FollowUpMonths = s.FollowUpMonths }},
}

func intOrEmpty(n int) string {
	if n == 0 {
		return ""
	}
	return fmt.Sprint(n)
}

func sortedKeys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

func allPatients(ctx context.Context, s *Store) (map[string]Patient, error) {
	rows, err := s.r.QueryContext(ctx, `SELECT `+patientColumns+` FROM patients`)
	if err != nil {
		return nil, fmt.Errorf("store: patients: %w", err)
	}
	defer rows.Close()
	out := map[string]Patient{}
	for rows.Next() {
		p, err := scanPatient(rows)
		if err != nil {
			return nil, fmt.Errorf("store: patients: %w", err)
		}
		out[p.Code] = p
	}
	return out, rows.Err()
}

// mergeVisits lists a store's visits with their patient code and recordings.
func mergeVisits(ctx context.Context, s *Store, part int) ([]mergeVisit, error) {
	rows, err := s.r.QueryContext(ctx, `
		SELECT v.id, p.code, v.visit_date, r.sha256, r.format, r.size, r.role
		FROM visits v JOIN patients p ON p.id = v.patient_id LEFT JOIN recordings r ON r.visit_id = v.id
		ORDER BY v.id, r.sha256`)
	if err != nil {
		return nil, fmt.Errorf("store: visits: %w", err)
	}
	defer rows.Close()
	var out []mergeVisit
	for rows.Next() {
		var id int64
		var code, date string
		var sha, format, role sql.NullString
		var size sql.NullInt64
		if err := rows.Scan(&id, &code, &date, &sha, &format, &size, &role); err != nil {
			return nil, fmt.Errorf("store: visits: %w", err)
		}
		if len(out) == 0 || out[len(out)-1].id != id {
			out = append(out, mergeVisit{part: part, id: id, code: code, date: date})
		}
		if sha.Valid {
			v := &out[len(out)-1]
			v.recs = append(v.recs, Recording{VisitID: id, SHA256: sha.String, Format: format.String, Size: size.Int64, Role: role.String})
			if v.shas != "" {
				v.shas += ","
			}
			v.shas += sha.String
		}
	}
	return out, rows.Err()
}

// copyRecording puts a part's recording file into s's data folder.
func (s *Store) copyRecording(part *Store, r Recording) (bool, error) {
	src := part.RecordingFilePath(r.SHA256, r.Format)
	f, err := os.Open(src)
	if err != nil {
		return false, fmt.Errorf("recording %s…: stored file: %w", r.SHA256[:12], pathless(err))
	}
	defer f.Close()
	_, made, err := s.PutRecording(r.SHA256, r.Format, f)
	return made, err
}

func pathless(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return fmt.Errorf("%s: %w", filepath.Base(pe.Path), pe.Err)
	}
	return err
}

// tableNode is a table of the visit's tree of rows: visits at the root,
// below it every table with a foreign key to its parent.
type tableNode struct {
	name     string
	cols     []string // every column, in schema order
	pk       string   // the INTEGER PRIMARY KEY column ("" none)
	children []childNode
}

type childNode struct {
	fk   string // the column referencing the parent's key
	node *tableNode
}

// visitTree reads the schema: visits and every table below it.
func (s *Store) visitTree(ctx context.Context) (*tableNode, error) {
	rows, err := s.r.QueryContext(ctx, `SELECT name FROM sqlite_schema WHERE type = 'table' AND name NOT LIKE 'sqlite_%' ORDER BY name`)
	if err != nil {
		return nil, fmt.Errorf("store: schema: %w", err)
	}
	var tables []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			rows.Close()
			return nil, fmt.Errorf("store: schema: %w", err)
		}
		tables = append(tables, n)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: schema: %w", err)
	}
	nodes := map[string]*tableNode{}
	type edge struct{ child, fk, parent string }
	var edges []edge
	for _, t := range tables {
		n := &tableNode{name: t}
		if err := s.tableColumns(ctx, n); err != nil {
			return nil, err
		}
		nodes[t] = n
		fks, err := s.r.QueryContext(ctx, `SELECT id, "table", "from" FROM pragma_foreign_key_list(?) ORDER BY id, seq`, t)
		if err != nil {
			return nil, fmt.Errorf("store: schema of %s: %w", t, err)
		}
		count := map[int]int{}
		var es []edge
		for fks.Next() {
			var id int
			var parent, from string
			if err := fks.Scan(&id, &parent, &from); err != nil {
				fks.Close()
				return nil, fmt.Errorf("store: schema of %s: %w", t, err)
			}
			count[id]++
			es = append(es, edge{t, from, parent})
		}
		fks.Close()
		for _, c := range count {
			if c > 1 {
				return nil, fmt.Errorf("store: schema of %s: a foreign key of several columns; merge cannot copy it", t)
			}
		}
		edges = append(edges, es...)
	}
	root := nodes["visits"]
	if root == nil {
		return nil, fmt.Errorf("store: schema: no visits table")
	}
	// Attach children breadth-first from visits; a table reached twice (two
	// parents in the tree) cannot be copied row by row.
	seen := map[string]bool{"visits": true}
	queue := []*tableNode{root}
	for len(queue) > 0 {
		n := queue[0]
		queue = queue[1:]
		for _, e := range edges {
			if e.parent != n.name || e.child == n.name {
				continue
			}
			if seen[e.child] {
				return nil, fmt.Errorf("store: schema: table %s hangs below visits twice; merge cannot copy it", e.child)
			}
			seen[e.child] = true
			if n.pk == "" {
				return nil, fmt.Errorf("store: schema: table %s references %s, which has no integer key; merge cannot copy it", e.child, n.name)
			}
			c := nodes[e.child]
			n.children = append(n.children, childNode{fk: e.fk, node: c})
			queue = append(queue, c)
		}
	}
	return root, nil
}

// tableColumns fills the columns and integer key of n.
func (s *Store) tableColumns(ctx context.Context, n *tableNode) error {
	rows, err := s.r.QueryContext(ctx, `SELECT name, upper(type), pk FROM pragma_table_info(?) ORDER BY cid`, n.name)
	if err != nil {
		return fmt.Errorf("store: schema of %s: %w", n.name, err)
	}
	defer rows.Close()
	keys, intKey := 0, ""
	n.cols = nil
	for rows.Next() {
		var name, typ string
		var pk int
		if err := rows.Scan(&name, &typ, &pk); err != nil {
			return fmt.Errorf("store: schema of %s: %w", n.name, err)
		}
		n.cols = append(n.cols, name)
		if pk > 0 {
			keys++
			if typ == "INTEGER" {
				intKey = name
			}
		}
	}
	if keys == 1 {
		n.pk = intKey
	}
	return rows.Err()
}

// sameColumns checks that every table of the tree has the same columns in s.
func (s *Store) sameColumns(ctx context.Context, n *tableNode) error {
	mine := &tableNode{name: n.name}
	if err := s.tableColumns(ctx, mine); err != nil {
		return err
	}
	if strings.Join(mine.cols, ",") != strings.Join(n.cols, ",") {
		return fmt.Errorf("table %s has columns %s, the database merged into %s", n.name,
			strings.Join(mine.cols, ", "), strings.Join(n.cols, ", "))
	}
	for _, c := range n.children {
		if err := s.sameColumns(ctx, c.node); err != nil {
			return err
		}
	}
	return nil
}

// rowCopier copies rows from a part into the transaction, with one
// prepared insert per table.
type rowCopier struct {
	tx    *sql.Tx
	stmts map[string]*sql.Stmt
}

func newRowCopier(tx *sql.Tx) *rowCopier { return &rowCopier{tx: tx, stmts: map[string]*sql.Stmt{}} }

func (c *rowCopier) close() {
	for _, st := range c.stmts {
		st.Close()
	}
}

// copy copies the rows of table n in part whose column where equals old,
// setting column set to value (the parent's key in s), and below each row
// the rows that reference it.
func (c *rowCopier) copy(ctx context.Context, part *Store, n *tableNode, where string, old any, set string, value int64) error {
	quoted := make([]string, len(n.cols))
	for i, col := range n.cols {
		quoted[i] = `"` + col + `"`
	}
	rows, err := part.r.QueryContext(ctx, `SELECT `+strings.Join(quoted, ", ")+` FROM "`+n.name+`" WHERE "`+where+`" = ? ORDER BY rowid`, old)
	if err != nil {
		return fmt.Errorf("read %s: %w", n.name, err)
	}
	var all [][]any
	for rows.Next() {
		vals := make([]any, len(n.cols))
		ptrs := make([]any, len(n.cols))
		for i := range vals {
			ptrs[i] = &vals[i]
		}
		if err := rows.Scan(ptrs...); err != nil {
			rows.Close()
			return fmt.Errorf("read %s: %w", n.name, err)
		}
		all = append(all, vals)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return fmt.Errorf("read %s: %w", n.name, err)
	}
	// The key is renumbered unless it is the column set (a row keyed by its
	// parent, such as conditions by visit_id).
	skip := -1
	if n.pk != "" && n.pk != set {
		skip = indexOf(n.cols, n.pk)
	}
	st, err := c.insert(ctx, n, skip)
	if err != nil {
		return err
	}
	setAt := indexOf(n.cols, set)
	for _, vals := range all {
		args := make([]any, 0, len(vals))
		for i, v := range vals {
			switch i {
			case skip:
				continue
			case setAt:
				v = value
			}
			args = append(args, v)
		}
		var newKey int64
		if skip >= 0 {
			if err := st.QueryRowContext(ctx, args...).Scan(&newKey); err != nil {
				return fmt.Errorf("write %s: %w", n.name, err)
			}
		} else if _, err := st.ExecContext(ctx, args...); err != nil {
			return fmt.Errorf("write %s: %w", n.name, err)
		}
		for _, ch := range n.children {
			oldKey, key := vals[skip], newKey
			if skip < 0 { // keyed by its parent: children reference that key
				oldKey, key = vals[indexOf(n.cols, n.pk)], value
			}
			if err := c.copy(ctx, part, ch.node, ch.fk, oldKey, ch.fk, key); err != nil {
				return err
			}
		}
	}
	return nil
}

// insert prepares the insert of n's columns but the one at skip (−1 none),
// returning the new key when one is skipped.
func (c *rowCopier) insert(ctx context.Context, n *tableNode, skip int) (*sql.Stmt, error) {
	key := fmt.Sprint(n.name, skip)
	if st, ok := c.stmts[key]; ok {
		return st, nil
	}
	var cols, marks []string
	for i, col := range n.cols {
		if i != skip {
			cols = append(cols, `"`+col+`"`)
			marks = append(marks, "?")
		}
	}
	q := `INSERT INTO "` + n.name + `" (` + strings.Join(cols, ", ") + `) VALUES (` + strings.Join(marks, ", ") + `)`
	if skip >= 0 {
		q += ` RETURNING "` + n.pk + `"`
	}
	st, err := c.tx.PrepareContext(ctx, q)
	if err != nil {
		return nil, fmt.Errorf("write %s: %w", n.name, err)
	}
	c.stmts[key] = st
	return st, nil
}

func indexOf(list []string, s string) int {
	for i, v := range list {
		if v == s {
			return i
		}
	}
	return -1
}
