package plumb_test

import (
	"fmt"
	"go/ast"
	"go/build"
	"go/constant"
	"go/importer"
	"go/parser"
	"go/printer"
	"go/token"
	"go/types"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// The Go specification (§ Arithmetic operators, "Floating-point
// operators") lets an implementation fuse x*y + z into one operation with
// a single rounding, "possibly across statements", and says that an
// explicit conversion to a floating-point type rounds and so prevents it.
// The compiler does fuse on arm64, ppc64le, s390x and on amd64 built with
// GOAMD64=v3 (its rewrite rules turn an addition or subtraction of a
// product into a fused multiply-add), so the same source gives other bits
// on those machines. plumb's outputs must be the same bits everywhere:
// every product that meets an addition or subtraction is rounded first,
// float64(x*y) + z, or written math.FMA(x, y, z) where fusion is meant.
//
// TestNoFusableArithmetic type-checks every non-test package of the module
// and lists each addition or subtraction of floating-point values (binary
// + and −, += and −=) one of whose operands is a product x*y not wrapped in
// a conversion, or a local variable whose value is such a product (the
// "across statements" case: t := x*y; s += t). Integer and complex
// arithmetic is not fused and is not listed.
func TestNoFusableArithmetic(t *testing.T) {
	if testing.Short() {
		t.Skip("type-checks the whole module")
	}
	var found []string
	dirs, exports := modulePackages(t)
	// The imports' types come from the compiler's export data, which the
	// build of these packages left in the build cache, not from type-checking
	// every imported package (the standard library's too) from its source.
	imp := importer.ForCompiler(token.NewFileSet(), "gc", func(path string) (io.ReadCloser, error) {
		if f := exports[path]; f != "" {
			return os.Open(f)
		}
		return nil, fmt.Errorf("go list -export gives no export data for %q", path)
	}) // one, so that each package is read once
	for _, dir := range dirs {
		if strings.HasPrefix(dir, "examples"+string(filepath.Separator)) {
			// The examples are ports, candidates that plumb judges, not
			// references: a port's arithmetic may be fused, and its tests
			// judge it by tolerance on every machine.
			continue
		}
		found = append(found, fusableIn(t, imp, dir)...)
	}
	sort.Strings(found)
	if len(found) > 0 {
		t.Errorf("%d fusable products (round the product, float64(x*y) + z, or write math.FMA where fusion is meant):\n%s",
			len(found), strings.Join(found, "\n"))
	}
}

// TestFusionScanner runs the scan on a file written for it, so that the
// check above can fail: every line marked "fusable" must be listed, and
// no other.
func TestFusionScanner(t *testing.T) {
	const src = `package p

func prod(a, b float64) float64 { return a * b }

func f(a, b, c float64, x, y float32, i, j int, m float64) {
	_ = a*b + c               // fusable
	_ = c - a*b               // fusable
	_ = float64(a*b) + c      // rounded
	_ = x*y + 1               // fusable
	_ = float32(x*y) + 1      // rounded
	_ = i*j + 3               // integer
	_ = 2*m - 1               // exact product
	_ = (a / b) + c           // no product
	s := c
	s += a * b                // fusable
	s -= float64(a * b)       // rounded
	t := a * b
	_ = s + t                 // fusable
	_ = prod(a, b) + c        // fusable
	_ = (a*b)*c + s           // fusable
}
`
	fset := token.NewFileSet()
	file, err := parser.ParseFile(fset, "p.go", src, 0)
	if err != nil {
		t.Fatal(err)
	}
	info := &types.Info{Types: map[ast.Expr]types.TypeAndValue{}, Defs: map[*ast.Ident]types.Object{}, Uses: map[*ast.Ident]types.Object{}}
	if _, err := (&types.Config{}).Check("p", fset, []*ast.File{file}, info); err != nil {
		t.Fatal(err)
	}
	var want []string
	for i, l := range strings.Split(src, "\n") {
		if strings.HasSuffix(l, "// fusable") {
			want = append(want, fmt.Sprintf("p.go:%d", i+1))
		}
	}
	var got []string
	for _, f := range fusableInFile(fset, info, file) {
		got = append(got, f[:strings.Index(f, ": ")])
	}
	sort.Strings(got)
	sort.Strings(want)
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("fusable lines found %v; want %v", got, want)
	}
}

// modulePackages lists the directories of the module's packages, as go
// list gives them, relative to the module root, and the export data file
// of every package they depend on, by import path (go list -export -deps).
func modulePackages(t *testing.T) (dirs []string, exports map[string]string) {
	out, err := exec.Command("go", "list", "-export", "-deps",
		"-f", "{{.ImportPath}}\t{{.Export}}\t{{with .Module}}{{if .Main}}{{$.Dir}}{{end}}{{end}}", "./...").Output()
	if err != nil {
		t.Fatalf("go list -export -deps ./...: %v", err)
	}
	root, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	exports = map[string]string{}
	for _, l := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Split(l, "\t")
		if len(f) != 3 {
			t.Fatalf("go list -export -deps ./...: line %q", l)
		}
		exports[f[0]] = f[1]
		if f[2] == "" {
			continue // not a package of this module
		}
		rel, err := filepath.Rel(root, f[2])
		if err != nil {
			t.Fatal(err)
		}
		dirs = append(dirs, rel)
	}
	return dirs, exports
}

// fusableIn type-checks the package in dir (its non-test files) and
// returns "file:line: expression" for every fusable product.
func fusableIn(t *testing.T, imp types.Importer, dir string) []string {
	fset := token.NewFileSet()
	bp, err := build.Default.ImportDir(dir, 0) // the files of this build, tags applied
	if err != nil {
		t.Fatalf("%s: %v", dir, err)
	}
	var files []*ast.File
	for _, name := range append(bp.GoFiles, bp.CgoFiles...) {
		f, err := parser.ParseFile(fset, filepath.Join(dir, name), nil, 0)
		if err != nil {
			t.Fatalf("%s: %v", dir, err)
		}
		files = append(files, f)
	}
	var found []string
	{
		info := &types.Info{Types: map[ast.Expr]types.TypeAndValue{}, Defs: map[*ast.Ident]types.Object{}, Uses: map[*ast.Ident]types.Object{}}
		conf := types.Config{Importer: imp, Error: func(error) {}}
		if _, err := conf.Check(dir, fset, files, info); err != nil {
			t.Fatalf("%s: type-checking: %v", dir, err)
		}
		for _, f := range files {
			found = append(found, fusableInFile(fset, info, f)...)
		}
	}
	return found
}

// fusableInFile walks one file.
func fusableInFile(fset *token.FileSet, info *types.Info, f *ast.File) []string {
	// products: local variables assigned a bare product somewhere.
	products := map[types.Object]bool{}
	ast.Inspect(f, func(n ast.Node) bool {
		switch s := n.(type) {
		case *ast.AssignStmt:
			if len(s.Lhs) == len(s.Rhs) {
				for i, l := range s.Lhs {
					id, ok := l.(*ast.Ident)
					if !ok || !isProduct(info, s.Rhs[i]) {
						continue
					}
					if o := objectOf(info, id); o != nil {
						products[o] = true
					}
				}
			}
		case *ast.ValueSpec:
			for i, id := range s.Names {
				if i < len(s.Values) && isProduct(info, s.Values[i]) {
					if o := info.Defs[id]; o != nil {
						products[o] = true
					}
				}
			}
		}
		return true
	})
	// returners: functions that return a bare product, which inlining
	// can fuse into the caller's addition.
	returners := map[types.Object]bool{}
	for _, d := range f.Decls {
		fd, ok := d.(*ast.FuncDecl)
		if !ok || fd.Body == nil {
			continue
		}
		ast.Inspect(fd.Body, func(n ast.Node) bool {
			if _, lit := n.(*ast.FuncLit); lit {
				return false
			}
			if r, ok := n.(*ast.ReturnStmt); ok {
				for _, e := range r.Results {
					if isProduct(info, e) {
						returners[info.Defs[fd.Name]] = true
					}
				}
			}
			return true
		})
	}
	fusable := func(e ast.Expr) bool {
		e = ast.Unparen(e)
		if isProduct(info, e) {
			return true
		}
		switch e := e.(type) {
		case *ast.Ident:
			return products[info.Uses[e]]
		case *ast.CallExpr:
			var id *ast.Ident
			switch fn := ast.Unparen(e.Fun).(type) {
			case *ast.Ident:
				id = fn
			case *ast.SelectorExpr:
				id = fn.Sel
			case *ast.IndexExpr: // an explicit instantiation f[T](…)
				id, _ = fn.X.(*ast.Ident)
			}
			if id != nil {
				if o, ok := info.Uses[id].(*types.Func); ok {
					return returners[o.Origin()]
				}
			}
		}
		return false
	}
	var found []string
	report := func(n ast.Node) {
		p := fset.Position(n.Pos())
		var b strings.Builder
		if err := printer.Fprint(&b, fset, n); err != nil {
			b.WriteString("?")
		}
		found = append(found, fmt.Sprintf("%s:%d: %s", p.Filename, p.Line, b.String()))
	}
	ast.Inspect(f, func(n ast.Node) bool {
		switch e := n.(type) {
		case *ast.BinaryExpr:
			if (e.Op == token.ADD || e.Op == token.SUB) && isFloat(info, e) && (fusable(e.X) || fusable(e.Y)) {
				report(e)
			}
		case *ast.AssignStmt:
			if (e.Tok == token.ADD_ASSIGN || e.Tok == token.SUB_ASSIGN) && len(e.Rhs) == 1 && isFloat(info, e.Lhs[0]) && fusable(e.Rhs[0]) {
				report(e)
			}
		}
		return true
	})
	return found
}

// isProduct reports whether e is a floating-point x*y (parentheses
// aside), which a conversion would have hidden.
func isProduct(info *types.Info, e ast.Expr) bool {
	b, ok := ast.Unparen(e).(*ast.BinaryExpr)
	return ok && b.Op == token.MUL && isFloat(info, b) && !powerOfTwo(info, b.X) && !powerOfTwo(info, b.Y)
}

// powerOfTwo reports whether e is a constant ±2^k: a product by it is
// exact (barring overflow and underflow), so fusing it changes nothing.
func powerOfTwo(info *types.Info, e ast.Expr) bool {
	tv, ok := info.Types[e]
	if !ok || tv.Value == nil {
		return false
	}
	v, exact := constant.Float64Val(constant.ToFloat(tv.Value))
	if !exact || v == 0 {
		return false
	}
	m, _ := math.Frexp(math.Abs(v))
	return m == 0.5
}

// isFloat reports whether e has a floating-point type (a type parameter
// counts when its constraint admits only floating-point types), and is not
// a constant, which the compiler folds exactly.
func isFloat(info *types.Info, e ast.Expr) bool {
	tv, ok := info.Types[e]
	if !ok || tv.Value != nil {
		return false
	}
	return floatType(tv.Type)
}

func floatType(t types.Type) bool {
	if tp, ok := t.(*types.TypeParam); ok {
		it, ok := tp.Constraint().Underlying().(*types.Interface)
		if !ok {
			return false
		}
		any := false
		for i := 0; i < it.NumEmbeddeds(); i++ {
			u, ok := it.EmbeddedType(i).Underlying().(*types.Union)
			if !ok {
				if floatType(it.EmbeddedType(i)) {
					any = true
				}
				continue
			}
			for j := 0; j < u.Len(); j++ {
				if floatType(u.Term(j).Type()) {
					any = true
				}
			}
		}
		return any
	}
	b, ok := t.Underlying().(*types.Basic)
	return ok && b.Info()&types.IsFloat != 0
}

func objectOf(info *types.Info, id *ast.Ident) types.Object {
	if o := info.Defs[id]; o != nil {
		return o
	}
	return info.Uses[id]
}
