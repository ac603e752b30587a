// Package surface checks a kernel package's float32 rule from its source:
// every exported function that takes or returns tensors has a twin named
// with the suffix 32 whose signature is the same in float32, and every
// function named …32 is such a twin. Methods are not considered.
package surface

import (
	"fmt"
	"go/ast"
	"go/build"
	"go/parser"
	"go/token"
	"go/types"
	"slices"
	"strings"
)

// Twins reads the non-test Go files of the package in dir and returns the
// names of the functions that have a float32 twin, sorted, and one problem
// per broken rule. to32 turns a float64 signature into its twin's (for
// example float64 → float32, Grads → Grads32); a function whose signature
// it changes takes or returns tensors.
func Twins(dir string, to32 *strings.Replacer) (twinned, problems []string, err error) {
	pkg, err := build.ImportDir(dir, 0)
	if err != nil {
		return nil, nil, err
	}
	fset := token.NewFileSet()
	sigs := map[string]string{}
	for _, name := range pkg.GoFiles {
		f, err := parser.ParseFile(fset, dir+"/"+name, nil, parser.SkipObjectResolution)
		if err != nil {
			return nil, nil, err
		}
		for _, d := range f.Decls {
			if fd, ok := d.(*ast.FuncDecl); ok && fd.Recv == nil && fd.Name.IsExported() {
				sigs[fd.Name.Name] = types.ExprString(fd.Type)
			}
		}
	}
	for name, sig := range sigs {
		if base, ok := strings.CutSuffix(name, "32"); ok {
			if _, ok := sigs[base]; !ok {
				problems = append(problems, fmt.Sprintf("%s is a float32 twin of nothing", name))
			}
			continue
		}
		if want := to32.Replace(sig); want != sig {
			if got := sigs[name+"32"]; got != want {
				problems = append(problems, fmt.Sprintf("%s takes or returns tensors: its twin %s32 must exist with the signature %s (found %q)", name, name, want, got))
			}
			twinned = append(twinned, name)
		}
	}
	slices.Sort(twinned)
	slices.Sort(problems)
	return twinned, problems, nil
}
