package cli

import (
	"bytes"
	"encoding/json"
	"go/ast"
	"go/parser"
	"go/token"
	"io"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// domainPackages know nothing of the command line.
var domainPackages = []string{"adjust", "levelbook", "reduce", "standards", "units", "sparse", "register", "netfile", "sheet", "geojson", "showtext"}

// No domain package imports cobra or pflag, directly or not, and none
// defines a method ExitCode: exit statuses are cli's business alone
// (exitCode in errors.go).
func TestDomainPackagesKnowNoCommandLine(t *testing.T) {
	t.Parallel()
	goBin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("no go command to list the packages with")
	}
	// cli itself is listed as a control: it must be seen to use cobra.
	args := []string{"list", "-json", "cairn/internal/cli"}
	for _, p := range domainPackages {
		args = append(args, "cairn/internal/"+p)
	}
	out, err := exec.Command(goBin, args...).Output()
	if err != nil {
		t.Fatalf("go list: %v", err)
	}
	type pkg struct {
		ImportPath string
		Dir        string
		GoFiles    []string
		Deps       []string
	}
	var pkgs []pkg
	dec := json.NewDecoder(bytes.NewReader(out))
	for {
		var p pkg
		if err := dec.Decode(&p); err == io.EOF {
			break
		} else if err != nil {
			t.Fatalf("go list output: %v", err)
		}
		pkgs = append(pkgs, p)
	}
	if len(pkgs) != len(domainPackages)+1 || pkgs[0].ImportPath != "cairn/internal/cli" {
		t.Fatalf("go list gave %d packages, want cli and %d", len(pkgs), len(domainPackages))
	}
	if cobraDep(pkgs[0].Deps) == "" {
		t.Fatalf("cli does not appear to use cobra: the check below would see nothing")
	}
	for _, p := range pkgs[1:] {
		if len(p.Deps) == 0 || len(p.GoFiles) == 0 {
			t.Fatalf("%s: go list gave no dependencies or files", p.ImportPath)
		}
		if d := cobraDep(p.Deps); d != "" {
			t.Errorf("%s depends on %s", p.ImportPath, d)
		}
		fset := token.NewFileSet()
		for _, name := range p.GoFiles {
			file, err := parser.ParseFile(fset, filepath.Join(p.Dir, name), nil, parser.SkipObjectResolution)
			if err != nil {
				t.Fatal(err)
			}
			for _, decl := range file.Decls {
				if fn, ok := decl.(*ast.FuncDecl); ok && fn.Recv != nil && fn.Name.Name == "ExitCode" {
					t.Errorf("%s: %s defines a method ExitCode", fset.Position(fn.Pos()), p.ImportPath)
				}
			}
		}
	}
}

// cobraDep returns the first of deps that is cobra, pflag or cli, or "".
func cobraDep(deps []string) string {
	for _, d := range deps {
		if strings.HasPrefix(d, "github.com/spf13/") || d == "cairn/internal/cli" {
			return d
		}
	}
	return ""
}
