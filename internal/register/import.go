package register

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"

	"cairn/internal/names"
	"cairn/internal/store"
	"cairn/internal/units"
)

// The files of an import or an export, one per kind of row, and the
// folder of photographs (docs/import.md).
const (
	MarksFile        = "marks.csv"
	DescriptionsFile = "descriptions.csv"
	AliasesFile      = "aliases.csv"
	ConditionsFile   = "conditions.csv"
	PhotosFile       = "photos.csv"
	HeightsFile      = "heights.csv"
	PhotosDir        = "photos"
)

// importFiles are the files of the layout in the order they are read: the
// other files may name a mark of the marks file, photos.csv a report of
// conditions.csv.
var importFiles = []string{MarksFile, DescriptionsFile, AliasesFile, ConditionsFile, PhotosFile, HeightsFile}

// The columns of each file. A column marked required must be in the
// header; the others may be left out. Export writes the columns of
// exportHeaders: the marks file without the columns that only an import
// by hand needs (aliases, description, position_source: export writes
// those rows in aliases.csv and descriptions.csv).
var (
	markHeader = []string{"designation", "aliases", "type", "setting", "stamping", "directions", "description", "lat", "lon", "position_source", "by",
		"retired_on", "retired_reason", "retired_by", "replaced_by"}
	descriptionHeader = []string{"mark", "type", "setting", "stamping", "directions", "description", "lat", "lon", "position_source", "reason", "by"}
	aliasHeader       = []string{"mark", "alias", "kind", "agency", "note", "by"}
	conditionHeader   = []string{"ref", "mark", "observed_on", "condition", "note", "by"}
	photoHeader       = []string{"condition", "view", "file", "file_name", "by"}
	heightHeader      = []string{"mark", "datum", "kind", "value", "unit", "decimals", "class", "in_force_from", "source", "reason", "by"}
	fileHeaders       = map[string][]string{MarksFile: markHeader, DescriptionsFile: descriptionHeader, AliasesFile: aliasHeader,
		ConditionsFile: conditionHeader, PhotosFile: photoHeader, HeightsFile: heightHeader}
	exportMarkHeader = []string{"designation", "type", "setting", "stamping", "directions", "lat", "lon", "by",
		"retired_on", "retired_reason", "retired_by", "replaced_by"}
	requiredColumns = map[string][]string{
		MarksFile:        {"designation"},
		DescriptionsFile: {"mark", "reason"},
		AliasesFile:      {"mark", "alias", "kind"},
		ConditionsFile:   {"mark", "observed_on", "condition"},
		PhotosFile:       {"condition", "view", "file"},
		HeightsFile:      {"mark", "datum", "value", "in_force_from", "reason"},
	}
	// stageFiles names the file of each kind of staged row.
	stageFiles = map[string]string{"mark": MarksFile, "description": DescriptionsFile, "alias": AliasesFile,
		"condition": ConditionsFile, "photo": PhotosFile, "height": HeightsFile}
)

// ImportProblem is one problem of an import's files: the file, the line
// (0 for the file as a whole) and the column.
type ImportProblem struct {
	File  string
	Line  int64
	Field string
	Msg   string
}

func (p ImportProblem) String() string {
	var b strings.Builder
	b.WriteString(p.File)
	// A feature of marks.geojson is named by its number (from 1) and
	// a property, as a row of a CSV file by its line and field.
	line, field := " line %d", " field %s"
	if p.File == MarksGeoJSON {
		line, field = " feature %d", " property %s"
	}
	if p.Line > 0 {
		fmt.Fprintf(&b, line, p.Line)
	}
	if p.Field != "" {
		fmt.Fprintf(&b, field, p.Field)
	}
	return b.String() + ": " + p.Msg
}

// ImportError is an import refused: every problem found in its files.
// Nothing was written.
type ImportError struct{ Problems []ImportProblem }

func (e *ImportError) Error() string {
	lines := make([]string, len(e.Problems))
	for i, p := range e.Problems {
		lines[i] = p.String()
	}
	return fmt.Sprintf("import refused, nothing written: %d problem(s)\n  %s", len(e.Problems), strings.Join(lines, "\n  "))
}

// ImportParams say what to import.
type ImportParams struct {
	// Dir is the folder holding the files of the layout.
	Dir string
	// Check reads and checks everything and writes nothing.
	Check bool
	// RecordedBy is who imports; the "by" of a row that gives none.
	RecordedBy string
}

// ImportResult is what an import wrote (or, with Check, would write).
type ImportResult struct {
	// EventID is the import's record (0 with Check).
	EventID int64
	Files   []store.ImportFile
	Counts  store.ImportCounts
}

// Import reads the files of an existing register in Dir and writes them
// in one transaction: every row is checked as it is read and copied into
// the register's staging tables (migrations/00019), the staged rows are
// checked against each other and the register as sets, and then inserted
// through the register's triggers. Any problem refuses the whole import,
// naming every problem (an *ImportError); Check stops there in any case.
// The files are streamed, never held.
func (r *Register) Import(ctx context.Context, p ImportParams) (ImportResult, error) {
	by := strings.TrimSpace(p.RecordedBy)
	if by == "" {
		return ImportResult{}, inputErr("by", "say who is importing")
	}
	var res ImportResult
	var problems []ImportProblem
	present, err := importPresent(p.Dir, &problems)
	if err != nil {
		return res, err
	}
	errChecked := errors.New("checked")
	err = r.withTx(ctx, pgx.TxOptions{}, func(tx pgx.Tx) error {
		photos := &photoFiles{named: map[string]bool{}}
		for _, name := range present {
			var f store.ImportFile
			var err error
			if name == MarksGeoJSON {
				f, err = r.importGeoJSON(ctx, tx, p.Dir, by, &problems)
			} else {
				f, err = r.importFile(ctx, tx, p.Dir, name, by, photos, &problems)
			}
			if err != nil {
				return err
			}
			res.Files = append(res.Files, f)
		}
		res.Files = append(res.Files, photos.files...)
		photos.unnamed(p.Dir, &problems)
		for _, f := range res.Files {
			if strings.HasPrefix(f.Name, PhotosDir+"/") {
				// A photograph is one file of its report, not a file of
				// rows: the same picture may be kept with two reports.
				continue
			}
			e, err := store.ImportEventWithFile(ctx, tx, f.SHA256)
			if errors.Is(err, store.ErrNotFound) {
				continue
			}
			if err != nil {
				return err
			}
			problems = append(problems, ImportProblem{File: f.Name, Msg: fmt.Sprintf("this file was imported already, by import %d on %s by %s (from %s): an import is made once",
				e.ID, e.RecordedAt.UTC().Format("2006-01-02 15:04:05Z"), e.RecordedBy, e.Source)})
		}
		staged, err := store.StageCheck(ctx, tx)
		if err != nil {
			return err
		}
		marksFile := MarksFile
		if slices.Contains(present, MarksGeoJSON) {
			marksFile = MarksGeoJSON
		}
		for _, s := range staged {
			if s.Kind == "mark" && marksFile == MarksGeoJSON {
				s.Msg = strings.NewReplacer(" on line ", " as feature ", " of line ", " of feature ", " the designation on line ", " the designation of feature ").Replace(s.Msg)
			}
			file := stageFiles[s.Kind]
			if s.Kind == "mark" {
				file = marksFile
			}
			problems = append(problems, ImportProblem{File: file, Line: s.Line, Field: s.Field, Msg: s.Msg})
		}
		if len(problems) > 0 {
			return &ImportError{Problems: sortProblems(problems)}
		}
		if p.Check {
			for _, f := range res.Files {
				switch f.Name {
				case MarksFile, MarksGeoJSON:
					res.Counts.Marks = f.Rows
				case DescriptionsFile:
					res.Counts.Versions = f.Rows
				case AliasesFile:
					res.Counts.Aliases = f.Rows
				case ConditionsFile:
					res.Counts.Conditions = f.Rows
				case PhotosFile:
					res.Counts.Photos = f.Rows
				case HeightsFile:
					res.Counts.Heights = f.Rows
				}
			}
			return errChecked
		}
		abs, err := filepath.Abs(p.Dir)
		if err != nil {
			abs = p.Dir
		}
		res.EventID, err = store.ImportEventInsert(ctx, tx, store.ImportEventInsertParams{Source: abs, Files: res.Files, RecordedBy: by})
		if err != nil {
			return err
		}
		res.Counts, err = store.StageApply(ctx, tx, res.EventID, fmt.Sprintf("imported (import %d)", res.EventID))
		return err
	})
	if errors.Is(err, errChecked) {
		return res, nil
	}
	if err != nil {
		return ImportResult{}, fmt.Errorf("import %s: %w", p.Dir, err)
	}
	return res, nil
}

func sortProblems(ps []ImportProblem) []ImportProblem {
	order := map[string]int{MarksGeoJSON: 0}
	for i, n := range importFiles {
		order[n] = i
	}
	for _, p := range ps {
		if _, ok := order[p.File]; !ok {
			order[p.File] = len(importFiles) // a photograph, or a file not of the layout
		}
	}
	slices.SortStableFunc(ps, func(a, b ImportProblem) int {
		if d := order[a.File] - order[b.File]; d != 0 {
			return d
		}
		if a.Line != b.Line {
			if a.Line < b.Line {
				return -1
			}
			return 1
		}
		return 0
	})
	return ps
}

// importPresent lists the files of the layout in dir, and a problem for
// any other file there (a file left out by mistake is never silent).
func importPresent(dir string, problems *[]ImportProblem) ([]string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, inputErr("dir", "%v", err)
	}
	have := map[string]bool{}
	for _, e := range entries {
		n := e.Name()
		switch {
		case slices.Contains(importFiles, n), n == MarksGeoJSON:
			have[n] = true
		case n == PhotosDir && e.IsDir():
			// Read with photos.csv, which names each file in it.
		case strings.HasPrefix(n, "."), strings.EqualFold(filepath.Ext(n), ".md"), strings.EqualFold(filepath.Ext(n), ".txt"):
		default:
			*problems = append(*problems, ImportProblem{File: n, Msg: "not a file of the layout (marks.csv or marks.geojson, descriptions.csv, aliases.csv, conditions.csv, photos.csv and the folder photos, heights.csv; docs/import.md)"})
		}
	}
	var present []string
	if have[MarksFile] && have[MarksGeoJSON] {
		*problems = append(*problems, ImportProblem{File: MarksGeoJSON, Msg: "marks.csv is in the folder too: give the marks in the one file or the other, not both"})
		delete(have, MarksGeoJSON)
	}
	if have[MarksGeoJSON] {
		present = append(present, MarksGeoJSON)
	}
	for _, n := range importFiles {
		if have[n] {
			present = append(present, n)
		}
	}
	if len(present) == 0 {
		return nil, inputErr("dir", "%s holds none of the files of the layout: marks.csv, marks.geojson, descriptions.csv, aliases.csv, conditions.csv, photos.csv, heights.csv (docs/import.md)", dir)
	}
	return present, nil
}

// csvFile reads one file of the layout: a byte-order mark, CRLF and
// trailing empty columns tolerated, the header checked.
type csvFile struct {
	name string
	r    *csv.Reader
	sum  hash.Hash
	col  map[string]int
	// unit is the unit a header of the value column gives (value_m), or "".
	unit string
	// problems collects what is wrong.
	problems *[]ImportProblem
	rows     int64
}

func (f *csvFile) problem(line int64, field, format string, a ...any) {
	*f.problems = append(*f.problems, ImportProblem{File: f.name, Line: line, Field: field, Msg: fmt.Sprintf(format, a...)})
}

// bomReader drops a UTF-8 byte-order mark at the start of a file.
func bomReader(r io.Reader) io.Reader {
	var head [3]byte
	n, err := io.ReadFull(r, head[:])
	if n == 3 && bytes.Equal(head[:], []byte{0xEF, 0xBB, 0xBF}) {
		return r
	}
	if err != nil && !errors.Is(err, io.ErrUnexpectedEOF) && !errors.Is(err, io.EOF) {
		return io.MultiReader(bytes.NewReader(head[:n]), errReader{err})
	}
	return io.MultiReader(bytes.NewReader(head[:n]), r)
}

type errReader struct{ err error }

func (e errReader) Read([]byte) (int, error) { return 0, e.err }

// openCSV opens file name of dir and reads its header against columns.
// It returns nil (with problems) if the header is unusable.
func openCSV(dir, name string, columns []string, problems *[]ImportProblem) (*csvFile, io.Closer, error) {
	fh, err := os.Open(filepath.Join(dir, name))
	if err != nil {
		return nil, nil, inputErr("dir", "%v", err)
	}
	sum := sha256.New()
	r := csv.NewReader(bomReader(io.TeeReader(fh, sum)))
	r.FieldsPerRecord = -1
	r.ReuseRecord = true
	f := &csvFile{name: name, r: r, sum: sum, col: map[string]int{}, problems: problems}
	header, err := r.Read()
	if err != nil {
		f.problem(1, "", "no header row: the first line names the columns (%s)", strings.Join(columns, ","))
		return nil, fh, nil
	}
	header = trimEmpty(header)
	ok := true
	for i, h := range header {
		h = strings.TrimSpace(h)
		if name == HeightsFile && strings.HasPrefix(h, "value_") {
			u, err := importUnit(strings.TrimPrefix(h, "value_"))
			if err != nil {
				f.problem(1, h, "%v", err)
				ok = false
				continue
			}
			f.unit, h = u, "value"
		}
		switch {
		case !slices.Contains(columns, h):
			f.problem(1, h, "unknown column %q (the columns are %s)", h, strings.Join(columns, ","))
			ok = false
		case f.has(h):
			f.problem(1, h, "column %s is given twice", h)
			ok = false
		default:
			f.col[h] = i
		}
	}
	for _, c := range requiredColumns[name] {
		if !f.has(c) {
			f.problem(1, c, "the header has no column %s", c)
			ok = false
		}
	}
	if !ok {
		return nil, fh, nil
	}
	return f, fh, nil
}

func trimEmpty(rec []string) []string {
	for len(rec) > 0 && strings.TrimSpace(rec[len(rec)-1]) == "" {
		rec = rec[:len(rec)-1]
	}
	return rec
}

func (f *csvFile) has(c string) bool { _, ok := f.col[c]; return ok }

// next reads the next record: its line and a getter of its fields; nil at
// the end. A record with more non-empty fields than the header is a
// problem.
func (f *csvFile) next() (int64, func(string) string, error) {
	for {
		rec, err := f.r.Read()
		if errors.Is(err, io.EOF) {
			return 0, nil, nil
		}
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			f.problem(int64(pe.Line), "", "%v", pe.Err)
			if errors.Is(pe.Err, csv.ErrQuote) || errors.Is(pe.Err, csv.ErrBareQuote) {
				continue
			}
			return 0, nil, nil
		}
		if err != nil {
			return 0, nil, err
		}
		line, _ := f.r.FieldPos(0)
		rec = trimEmpty(rec)
		if len(rec) == 0 {
			continue
		}
		f.rows++
		if len(rec) > len(f.col) {
			f.problem(int64(line), "", "%d fields, more than the header's %d columns", len(rec), len(f.col))
		}
		return int64(line), func(c string) string {
			i, ok := f.col[c]
			if !ok || i >= len(rec) {
				return ""
			}
			return strings.TrimSpace(rec[i])
		}, nil
	}
}

var (
	isoDate    = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[0-9]{4}-[0-9]{2}-[0-9]{2}$`) })
	slashDate  = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[0-9]{1,2}[/.][0-9]{1,2}[/.][0-9]{2,4}$`) })
	serialDate = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[0-9]{4,6}(\.[0-9]+)?$`) })
)

// importDate reads a date written YYYY-MM-DD; a spreadsheet's habits
// (6/1/1994, the serial number 34486) are refused by name, since their
// day and month cannot be told apart or their epoch is the program's.
func importDate(s string) (time.Time, error) {
	switch {
	case s == "":
		return time.Time{}, fmt.Errorf("no date: write it YYYY-MM-DD")
	case slashDate().MatchString(s):
		return time.Time{}, fmt.Errorf("%q is a spreadsheet's date, whose day and month cannot be told apart: write it YYYY-MM-DD (e.g. 1994-06-01)", s)
	case serialDate().MatchString(s):
		return time.Time{}, fmt.Errorf("%q looks like a spreadsheet's serial day number: write the date YYYY-MM-DD (e.g. 1994-06-01)", s)
	case !isoDate().MatchString(s):
		return time.Time{}, fmt.Errorf("%q is not a date written YYYY-MM-DD", s)
	}
	t, err := time.Parse("2006-01-02", s)
	if err != nil {
		return time.Time{}, fmt.Errorf("%q is not a date: %v (write it YYYY-MM-DD)", s, err)
	}
	return t, nil
}

// importInForce reads an in-force time: a date YYYY-MM-DD (midnight UTC)
// or an RFC 3339 time.
func importInForce(s string) (time.Time, error) {
	if strings.ContainsAny(s, "T ") && len(s) > 10 {
		t, err := time.Parse(time.RFC3339Nano, strings.Replace(s, " ", "T", 1))
		if err != nil {
			return time.Time{}, fmt.Errorf("%q is not a time: write a date YYYY-MM-DD or a time 2006-01-02T15:04:05Z", s)
		}
		return t, nil
	}
	return importDate(s)
}

// importUnit reads a unit as units.Parse does, but refuses a bare "ft":
// an office's old files do not say which foot, so the import makes them.
func importUnit(s string) (string, error) {
	if strings.EqualFold(strings.TrimSpace(s), "ft") {
		return "", fmt.Errorf("%q is ambiguous: write intl-ft for the international foot (0.3048 m) or usft for the US survey foot (1200/3937 m)", s)
	}
	u, err := units.Parse(strings.ReplaceAll(s, "_", "-"))
	if err != nil {
		return "", err
	}
	return u.String(), nil
}

// ExportUnit is the word export writes for unit u (a code of
// store.Height.Unit): "intl-ft" for the international foot, which the
// import refuses as a bare "ft".
func ExportUnit(u string) string {
	if u == string(units.Foot) {
		return "intl-ft"
	}
	return u
}

var errStop = errors.New("stop")

// importFile streams one file into its staging table, checking each row.
// photos collects the photographs photos.csv names.
func (r *Register) importFile(ctx context.Context, tx pgx.Tx, dir, name, by string, photos *photoFiles, problems *[]ImportProblem) (store.ImportFile, error) {
	f, closer, err := openCSV(dir, name, fileHeaders[name], problems)
	if err != nil {
		return store.ImportFile{}, err
	}
	defer closer.Close()
	if f == nil {
		return store.ImportFile{Name: name}, nil
	}
	var row func(line int64, get func(string) string) []any
	var table string
	var columns []string
	latest := LatestToday(time.Now())
	switch name {
	case MarksFile:
		table, columns, row = "mark", store.StageMarkColumns, f.markRow(by, latest)
	case DescriptionsFile:
		table, columns, row = "description", store.StageDescriptionColumns, f.descriptionRow(by)
	case AliasesFile:
		table, columns, row = "alias", store.StageAliasColumns, f.aliasRow(by)
	case ConditionsFile:
		table, columns, row = "condition", store.StageConditionColumns, f.conditionRow(by, latest)
	case PhotosFile:
		table, columns, row = "photo", store.StagePhotoColumns, f.photoRow(dir, by, photos)
	default:
		table, columns, row = "height", store.StageHeightColumns, f.heightRow(by)
	}
	_, err = store.StageCopy(ctx, tx, table, columns, func() ([]any, error) {
		for {
			line, get, err := f.next()
			if err != nil || get == nil {
				return nil, err
			}
			if v := row(line, get); v != nil {
				return v, nil
			}
		}
	})
	if err != nil {
		return store.ImportFile{}, fmt.Errorf("%s: %w", name, err)
	}
	return store.ImportFile{Name: name, SHA256: hex.EncodeToString(f.sum.Sum(nil)), Rows: f.rows}, nil
}

func orBy(s, by string) string {
	if s == "" {
		return by
	}
	return s
}

func (f *csvFile) markRow(by string, latest time.Time) func(int64, func(string) string) []any {
	return func(line int64, get func(string) string) []any {
		des := names.Normal(get("designation"))
		if !designationPattern().MatchString(des) {
			f.problem(line, "designation", "%q is not a designation: letters and digits, then also . _ / -", des)
			return nil
		}
		aliases, kinds, agencies := []string{}, []string{}, []string{}
		if s := get("aliases"); s != "" {
			for _, a := range strings.Split(s, ";") {
				kind, alias, ok := strings.Cut(strings.TrimSpace(a), ":")
				agency := ""
				if k, ag, isAgency := strings.Cut(kind, "="); isAgency {
					kind, agency = k, strings.TrimSpace(ag)
				}
				kind, alias = strings.TrimSpace(kind), strings.TrimSpace(alias)
				switch {
				case !ok:
					f.problem(line, "aliases", "%q: write each alias KIND:ALIAS (former:, stamped:, agency=NAME:), separated by ;", a)
				case kind == "agency" && agency == "":
					f.problem(line, "aliases", "%q: an agency's number names the agency (agency=NAME:ALIAS)", a)
				default:
					if msg := aliasProblem(kind, agency, alias); msg != "" {
						if strings.HasPrefix(msg, "the kind") {
							msg += "=NAME"
						}
						f.problem(line, "aliases", "%q: %s", a, msg)
						continue
					}
					aliases, kinds, agencies = append(aliases, alias), append(kinds, kind), append(agencies, agency)
				}
			}
		}
		lat, lon := f.position(line, get)
		var retired *time.Time
		reason, repl := get("retired_reason"), names.Normal(get("replaced_by"))
		if s := get("retired_on"); s != "" {
			t, err := importDate(s)
			switch {
			case err != nil:
				f.problem(line, "retired_on", "%v", err)
			case t.After(latest):
				f.problem(line, "retired_on", "%s is in the future", s)
			default:
				retired = &t
			}
			if reason == "" {
				f.problem(line, "retired_reason", "say why the mark was retired")
			}
		} else if reason != "" || repl != "" {
			f.problem(line, "retired_on", "a retirement's reason or replacement is given without the date it was retired")
		}
		if repl != "" && !designationPattern().MatchString(repl) {
			f.problem(line, "replaced_by", "%q is not a designation", repl)
			repl = ""
		}
		replFolded := ""
		if repl != "" {
			replFolded = names.Fold(repl)
			if replFolded == names.Fold(des) {
				f.problem(line, "replaced_by", "a mark does not replace itself")
			}
		}
		// A row with a problem is staged all the same, without the values
		// at fault, so that the rows naming its mark are not refused for
		// it too; the import is refused for its problem.
		return []any{line, des, names.Fold(des), aliases, kinds, agencies, get("type"), get("setting"), get("stamping"),
			get("directions"), get("description"), lat, lon, get("position_source"), orBy(get("by"), by),
			retired, reason, get("retired_by"), repl, replFolded}
	}
}

// aliasProblem says what is wrong with an alias of kind (and agency), or "".
func aliasProblem(kind, agency, alias string) string {
	switch {
	case kind != "former" && kind != "stamped" && kind != "agency":
		return "the kind of an alias is former, stamped or agency"
	case (kind == "agency") != (agency != ""):
		return "an agency's number names the agency, and only it"
	case !aliasPattern().MatchString(alias) || strings.Contains(alias, "  ") || strings.HasSuffix(alias, " "):
		return fmt.Sprintf("%q is not an alias: letters, digits, single spaces and . _ / # -, at most 64", alias)
	}
	return ""
}

// position reads a row's lat and lon: both or neither, in range.
func (f *csvFile) position(line int64, get func(string) string) (lat, lon *float64) {
	for _, c := range []struct {
		name  string
		dst   **float64
		limit float64
	}{{"lat", &lat, 90}, {"lon", &lon, 180}} {
		s := get(c.name)
		if s == "" {
			continue
		}
		v, err := strconv.ParseFloat(s, 64)
		switch {
		case err != nil:
			f.problem(line, c.name, "%q is not a number of decimal degrees", s)
		case v < -c.limit || v > c.limit:
			f.problem(line, c.name, "%s is outside -%g to %g degrees", s, c.limit, c.limit)
		default:
			*c.dst = &v
		}
	}
	if (get("lat") == "") != (get("lon") == "") {
		f.problem(line, "lat", "give lat and lon together, or neither")
		return nil, nil
	}
	return lat, lon
}

// descriptionRow reads a later version of a mark's description, whole (a
// version holds every descriptive field, not only those that changed).
func (f *csvFile) descriptionRow(by string) func(int64, func(string) string) []any {
	return func(line int64, get func(string) string) []any {
		bad := len(*f.problems)
		mark := names.Normal(get("mark"))
		if mark == "" {
			f.problem(line, "mark", "no mark named")
		}
		if get("reason") == "" {
			f.problem(line, "reason", "say why the description changed")
		}
		lat, lon := f.position(line, get)
		if len(*f.problems) > bad {
			return nil
		}
		return []any{line, mark, names.Fold(mark), get("type"), get("setting"), get("stamping"), get("directions"), get("description"),
			lat, lon, get("position_source"), get("reason"), orBy(get("by"), by)}
	}
}

// aliasRow reads an alias of aliases.csv.
func (f *csvFile) aliasRow(by string) func(int64, func(string) string) []any {
	return func(line int64, get func(string) string) []any {
		bad := len(*f.problems)
		mark := names.Normal(get("mark"))
		if mark == "" {
			f.problem(line, "mark", "no mark named")
		}
		kind, agency, alias := get("kind"), get("agency"), get("alias")
		switch {
		case kind != "former" && kind != "stamped" && kind != "agency":
			f.problem(line, "kind", "%q: the kind of an alias is former, stamped or agency", kind)
		case (kind == "agency") != (agency != ""):
			f.problem(line, "agency", "an agency's number names the agency, and only it")
		default:
			if msg := aliasProblem(kind, agency, alias); msg != "" {
				f.problem(line, "alias", "%s", msg)
			}
		}
		if len(*f.problems) > bad {
			return nil
		}
		return []any{line, mark, names.Fold(mark), alias, names.Fold(alias), kind, agency, get("note"), orBy(get("by"), by)}
	}
}

// photoFiles are the photographs photos.csv names, as files of the import.
type photoFiles struct {
	named map[string]bool // by path in the folder, slash-separated
	files []store.ImportFile
}

// unnamed adds a problem for each file in the folder photos that
// photos.csv does not name: a photograph is never silently left behind.
func (p *photoFiles) unnamed(dir string, problems *[]ImportProblem) {
	entries, err := os.ReadDir(filepath.Join(dir, PhotosDir))
	if err != nil {
		return
	}
	for _, e := range entries {
		n := PhotosDir + "/" + e.Name()
		if !p.named[n] && !strings.HasPrefix(e.Name(), ".") {
			*problems = append(*problems, ImportProblem{File: n, Msg: "photos.csv names no such file: list it there with its report, or take it out of the folder"})
		}
	}
}

var sha256Name = sync.OnceValue(func() *regexp.Regexp { return regexp.MustCompile(`^[0-9a-f]{64}$`) })

// photoRow reads a photograph of photos.csv and its file, one at a time:
// a JPEG or PNG of at most store.PhotoMaxBytes under the folder photos. A
// file named by a SHA-256 (as export names them) must have it.
func (f *csvFile) photoRow(dir, by string, photos *photoFiles) func(int64, func(string) string) []any {
	return func(line int64, get func(string) string) []any {
		bad := len(*f.problems)
		ref := get("condition")
		if ref == "" {
			f.problem(line, "condition", "no condition report named (its ref in conditions.csv)")
		}
		rel := get("file")
		clean := filepath.ToSlash(filepath.Clean(filepath.FromSlash(rel)))
		switch {
		case rel == "":
			f.problem(line, "file", "no file named")
		case filepath.IsAbs(rel) || !strings.HasPrefix(clean, PhotosDir+"/") || strings.Contains(clean[len(PhotosDir)+1:], "/"):
			f.problem(line, "file", "%q: a photograph is a file in the folder photos beside photos.csv (photos/NAME)", rel)
		}
		if len(*f.problems) > bad {
			return nil
		}
		photos.named[clean] = true
		content, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(clean)))
		if err != nil {
			f.problem(line, "file", "%v", err)
			return nil
		}
		sum := sha256.Sum256(content)
		hexSum := hex.EncodeToString(sum[:])
		if stem := strings.TrimSuffix(filepath.Base(clean), filepath.Ext(clean)); sha256Name().MatchString(stem) && stem != hexSum {
			f.problem(line, "file", "%s is named by a SHA-256 that is not its own (%s): the file is not the one exported", clean, hexSum)
			return nil
		}
		name := get("file_name")
		if name == "" {
			name = filepath.Base(clean)
		}
		ph := PhotoFile{View: get("view"), Name: clean, Content: content}
		media, err := ph.check()
		var ie *InputError
		if errors.As(err, &ie) {
			field := "file"
			if strings.Contains(ie.Msg, "unknown view") {
				field = "view"
			}
			f.problem(line, field, "%s", ie.Msg)
			return nil
		}
		if err != nil {
			f.problem(line, "file", "%v", err)
			return nil
		}
		if !slices.ContainsFunc(photos.files, func(f store.ImportFile) bool { return f.Name == clean }) {
			photos.files = append(photos.files, store.ImportFile{Name: clean, SHA256: hexSum, Rows: 1})
		}
		return []any{line, ref, ph.View, media, name, content, sum[:], orBy(get("by"), by)}
	}
}

func (f *csvFile) conditionRow(by string, latest time.Time) func(int64, func(string) string) []any {
	return func(line int64, get func(string) string) []any {
		bad := len(*f.problems)
		mark := names.Normal(get("mark"))
		if mark == "" {
			f.problem(line, "mark", "no mark named")
		}
		on, err := importDate(get("observed_on"))
		if err != nil {
			f.problem(line, "observed_on", "%v", err)
		} else if on.After(latest) {
			f.problem(line, "observed_on", "%s is in the future", get("observed_on"))
		}
		cond := get("condition")
		if !slices.Contains(Conditions, cond) {
			f.problem(line, "condition", "%q is not a condition (%s)", cond, strings.Join(Conditions, ", "))
		}
		ref := get("ref")
		if len(ref) > 64 {
			f.problem(line, "ref", "a ref of %d characters: at most 64", len(ref))
		}
		if len(*f.problems) > bad {
			return nil
		}
		return []any{line, mark, names.Fold(mark), on, cond, get("note"), orBy(get("by"), by), ref}
	}
}

// heightFields maps the fields of checkHeight's errors to the columns.
var heightFields = map[string]string{"in-force-from": "in_force_from", "adjustment": "kind"}

func (f *csvFile) heightRow(by string) func(int64, func(string) string) []any {
	return func(line int64, get func(string) string) []any {
		bad := len(*f.problems)
		mark := names.Normal(get("mark"))
		if mark == "" {
			f.problem(line, "mark", "no mark named")
		}
		p := HeightSetParams{Designation: mark, Datum: get("datum"), Value: get("value"), Class: get("class"),
			Kind: get("kind"), Source: get("source"), Reason: get("reason"), RecordedBy: orBy(get("by"), by)}
		if p.Datum == "" {
			f.problem(line, "datum", "no datum named")
		}
		if p.Kind == KindAdjustment {
			f.problem(line, "kind", "a height from one of this register's adjustments is not imported: import it as authority, citing the publication")
		}
		unit := get("unit")
		switch {
		case unit != "" && f.unit != "":
			if u, err := importUnit(unit); err != nil {
				f.problem(line, "unit", "%v", err)
			} else if u != f.unit {
				f.problem(line, "unit", "%s, but the header's value column is in %s", unit, f.unit)
			}
			p.Unit = f.unit
		case unit != "":
			u, err := importUnit(unit)
			if err != nil {
				f.problem(line, "unit", "%v", err)
			}
			p.Unit = u
		default:
			p.Unit = f.unit
		}
		if p.Kind == KindWithdrawal {
			p.Unit = ""
		}
		if s := get("decimals"); s != "" {
			d, err := strconv.Atoi(s)
			if err != nil {
				f.problem(line, "decimals", "%q is not a whole number", s)
			}
			p.Decimals = &d
		}
		if t, err := importInForce(get("in_force_from")); err != nil {
			f.problem(line, "in_force_from", "%v", err)
		} else {
			p.InForceFrom = &t
		}
		if len(*f.problems) > bad {
			return nil
		}
		ins, err := checkHeight(&p)
		var ie *InputError
		if errors.As(err, &ie) {
			field := ie.Field
			if c, ok := heightFields[field]; ok {
				field = c
			}
			f.problem(line, field, "%s", ie.Msg)
			return nil
		}
		if err != nil {
			f.problem(line, "", "%v", err)
			return nil
		}
		var dec *int16
		if ins.Decimals != nil {
			d := int16(*ins.Decimals)
			dec = &d
		}
		return []any{line, mark, names.Fold(mark), p.Datum, ins.SourceKind, ins.Value, ins.Unit, dec, ins.Class,
			*ins.InForceFrom, ins.Source, ins.Reason, ins.RecordedBy}
	}
}
