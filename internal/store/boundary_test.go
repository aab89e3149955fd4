package store_test

import (
	"go/ast"
	"go/parser"
	"go/token"
	"io/fs"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// sqlText matches a string literal that is a statement of SQL: a verb in
// capitals at its start (as cairn writes SQL), followed by what that verb
// takes.
var sqlText = regexp.MustCompile(`(?s)^\s*(SELECT\s.+\bFROM\b|SELECT\s+(pg_|EXISTS|count|\$)|INSERT\s+INTO\s|UPDATE\s+\w+\s+SET\s|DELETE\s+FROM\s|CREATE\s+(DATABASE|TABLE|ROLE|INDEX|FUNCTION|TRIGGER)\s|ALTER\s+(DATABASE|TABLE|ROLE)\s|DROP\s+(DATABASE|TABLE|ROLE)\s|GRANT\s|REVOKE\s|COPY\s+\w+\s*(\(|FROM\s|TO\s)|LOCK\s+TABLE\s|SET\s+(LOCAL\s+)?\w+\s*(=|TO)\s)`)

// TestNoSQLOutsideStore keeps SQL in package store (docs/architecture.md):
// no Go file of another package, tests aside, holds a string literal that
// is a statement of SQL. Tests may speak SQL to a database they attack or
// inspect.
func TestNoSQLOutsideStore(t *testing.T) {
	root := filepath.Join("..", "..")
	fset := token.NewFileSet()
	checked := 0
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && (d.Name() == "store" && filepath.Dir(path) == filepath.Join(root, "internal") || strings.HasPrefix(d.Name(), ".")) && path != root {
			return filepath.SkipDir
		}
		if d.IsDir() || !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") {
			return nil
		}
		f, err := parser.ParseFile(fset, path, nil, parser.SkipObjectResolution)
		if err != nil {
			return err
		}
		checked++
		ast.Inspect(f, func(n ast.Node) bool {
			lit, ok := n.(*ast.BasicLit)
			if !ok || lit.Kind != token.STRING {
				return true
			}
			if s, err := strconv.Unquote(lit.Value); err == nil && sqlText.MatchString(s) {
				t.Errorf("%s: SQL outside package store: %.60q", fset.Position(lit.Pos()), s)
			}
			return true
		})
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if checked < 50 {
		t.Fatalf("checked %d files; the walk did not reach the project's packages", checked)
	}
}

// The pattern itself must catch the statements cairn writes and pass over
// prose (a test that cannot fail is a defect).
func TestSQLTextPattern(t *testing.T) {
	for _, s := range []string{
		"SELECT id FROM mark WHERE designation = $1",
		"SELECT pg_advisory_lock(727411)",
		"INSERT INTO height (mark_id) VALUES ($1)",
		"CREATE DATABASE cairn",
		"DROP DATABASE IF EXISTS x WITH (FORCE)",
		"ALTER DATABASE x WITH IS_TEMPLATE true",
		"LOCK TABLE adjustment_result IN SHARE MODE",
		"SET LOCAL lock_timeout = '1s'",
		"COPY height TO STDOUT",
	} {
		if !sqlText.MatchString(s) {
			t.Errorf("%q is not seen as SQL", s)
		}
	}
	for _, s := range []string{
		"select the runs to adjust from the register",
		"say why these heights are published",
		"update the mark's description",
		"create the private server's folder",
		"Copy the whole register into one file",
		"SELECT the runs to adjust",
	} {
		if sqlText.MatchString(s) {
			t.Errorf("%q is seen as SQL", s)
		}
	}
}
