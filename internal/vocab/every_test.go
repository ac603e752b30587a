package vocab_test

import (
	"encoding/json"
	"go/ast"
	"go/parser"
	"go/token"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"

	// Every package that declares a convention type, so that its
	// vocabulary is registered.
	_ "github.com/plumbref/plumb/attention"
	_ "github.com/plumbref/plumb/attention/attentiontest"
	_ "github.com/plumbref/plumb/block"
	_ "github.com/plumbref/plumb/compare"
	_ "github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/vocab"
	_ "github.com/plumbref/plumb/kvcache"
	_ "github.com/plumbref/plumb/mask"
	_ "github.com/plumbref/plumb/norm"
	_ "github.com/plumbref/plumb/norm/normtest"
	_ "github.com/plumbref/plumb/npy"
	_ "github.com/plumbref/plumb/posenc"
	_ "github.com/plumbref/plumb/quant"
)

// conventionDirs are the packages imported above, from the repository root.
var conventionDirs = []string{"attention", "attention/attentiontest", "block", "compare", "ffn", "kvcache", "mask", "norm", "norm/normtest", "npy", "posenc", "quant"}

// call calls the method name of v with args and returns its results.
func call(t *testing.T, v reflect.Value, name string, args ...any) []reflect.Value {
	t.Helper()
	m := v.MethodByName(name)
	ensure.True(t, m.IsValid(), "%s has no method %s", v.Type(), name)
	in := make([]reflect.Value, len(args))
	for i, a := range args {
		in[i] = reflect.ValueOf(a)
	}
	return m.Call(in)
}

func errOf(v reflect.Value) error {
	if v.IsNil() {
		return nil
	}
	return v.Interface().(error)
}

// Every registered convention, through the methods of its own type: the
// zero value is the default (the first word); Values, String, Meaning,
// MarshalText and Check agree with the vocabulary; every word reads back to
// its value through UnmarshalText and through encoding/json; a value without
// a word and a text that is no word are refused with an error that lists
// the words.
func TestEveryConventionRoundTrips(t *testing.T) {
	all := vocab.All()
	ensure.GreaterOrEqual(t, len(all), len(conventionDirs))
	for _, e := range all {
		if !strings.Contains(e.Name, ".") || strings.HasPrefix(e.Name, "paint.") {
			continue // the test vocabulary of vocab_test.go
		}
		t.Run(e.Name, func(t *testing.T) {
			zero := reflect.Zero(e.Type)
			values := call(t, zero, "Values")[0]
			ensure.Equal(t, len(e.Words), values.Len(), "Values lists every word's value")
			expect.Equal(t, e.Words[0].Text, call(t, zero, "String")[0].String(), "the zero value is the default, the first word")
			seen := map[int64]bool{}
			for i, w := range e.Words {
				v := values.Index(i)
				seen[v.Convert(reflect.TypeFor[int64]()).Int()] = true
				expect.Equal(t, w.Text, call(t, v, "String")[0].String())
				expect.Equal(t, w.Meaning, call(t, v, "Meaning")[0].String())
				expect.NoError(t, errOf(call(t, v, "Check")[0]))
				out := call(t, v, "MarshalText")
				ensure.NoError(t, errOf(out[1]))
				expect.Equal(t, w.Text, string(out[0].Bytes()))

				back := reflect.New(e.Type)
				back.Elem().Set(values.Index((i + 1) % values.Len()))
				ensure.NoError(t, errOf(call(t, back, "UnmarshalText", []byte(w.Text))[0]))
				expect.Equal(t, v.Interface(), back.Elem().Interface(), "UnmarshalText(%q)", w.Text)

				js, err := json.Marshal(v.Interface())
				ensure.NoError(t, err)
				expect.Equal(t, `"`+w.Text+`"`, string(js))
				back = reflect.New(e.Type)
				ensure.NoError(t, json.Unmarshal(js, back.Interface()))
				expect.Equal(t, v.Interface(), back.Elem().Interface())
			}

			bad := reflect.New(e.Type).Elem()
			n := int64(1)
			for seen[n] {
				n++
			}
			if bad.CanInt() {
				bad.SetInt(n)
			} else {
				bad.SetUint(uint64(n))
			}
			var ve *vocab.Error
			err := errOf(call(t, bad, "Check")[0])
			ensure.ErrorAs(t, err, &ve, "Check of a value with no word")
			expect.Len(t, ve.Words, len(e.Words))
			expect.Error(t, errOf(call(t, bad, "MarshalText")[1]))
			expect.Contains(t, call(t, bad, "String")[0].String(), "(")

			err = errOf(call(t, reflect.New(e.Type), "UnmarshalText", []byte("no-such-word"))[0])
			ensure.ErrorAs(t, err, &ve)
			for _, w := range e.Words {
				expect.Contains(t, err.Error(), w.Text)
			}
			pkg, typ, _ := strings.Cut(e.Name, ".")
			if !strings.HasSuffix(pkg, "test") {
				// a suite reports through its TB and has no sentinels
				expect.NotEmpty(t, ve.Unwrap(), "the error wraps the package's sentinel")
			}

			// A nil receiver is an error, not a panic, that wraps the same
			// sentinel as a word refused and reads (Set.Unmarshal)
			// "<sentinel>: <Type>.UnmarshalText: receiver = nil; want a *<Type> to set",
			// with the package's name for the sentinel of a suite.
			err = errOf(call(t, reflect.Zero(reflect.PointerTo(e.Type)), "UnmarshalText", []byte(e.Words[0].Text))[0])
			lead := pkg
			if s := ve.Unwrap(); len(s) > 0 {
				expect.ErrorIs(t, err, s[0])
				lead = s[0].Error()
			}
			expect.EqualError(t, err, lead+": "+typ+".UnmarshalText: receiver = nil; want a *"+typ+" to set")
		})
	}
}

// Every integer type with a MarshalText method in the packages that declare
// conventions has a registered vocabulary: no convention type keeps its
// words by hand.
func TestEveryConventionTypeIsRegistered(t *testing.T) {
	registered := map[string]bool{}
	for _, e := range vocab.All() {
		registered[e.Type.PkgPath()+"."+e.Type.Name()] = true
	}
	for _, dir := range conventionDirs {
		files, err := filepath.Glob(filepath.Join("..", "..", dir, "*.go"))
		ensure.NoError(t, err)
		for _, path := range files {
			if strings.HasSuffix(path, "_test.go") {
				continue
			}
			src, err := os.ReadFile(path)
			ensure.NoError(t, err)
			f, err := parser.ParseFile(token.NewFileSet(), path, src, 0)
			ensure.NoError(t, err)
			for _, d := range f.Decls {
				fn, ok := d.(*ast.FuncDecl)
				if !ok || fn.Recv == nil || fn.Name.Name != "MarshalText" {
					continue
				}
				typ := fn.Recv.List[0].Type
				if s, ok := typ.(*ast.StarExpr); ok {
					typ = s.X
				}
				name := typ.(*ast.Ident).Name
				if !integerType(f, name) {
					continue
				}
				expect.True(t, registered["github.com/plumbref/plumb/"+dir+"."+name], "%s: %s has MarshalText but no registered vocabulary (vocab.New)", path, name)
			}
		}
	}
}

// integerType reports whether f declares name as a type with an integer
// underlying type.
func integerType(f *ast.File, name string) bool {
	for _, d := range f.Decls {
		g, ok := d.(*ast.GenDecl)
		if !ok || g.Tok != token.TYPE {
			continue
		}
		for _, s := range g.Specs {
			ts := s.(*ast.TypeSpec)
			if id, ok := ts.Type.(*ast.Ident); ok && ts.Name.Name == name {
				switch id.Name {
				case "int", "uint8", "int8", "uint", "int32", "uint32", "int64", "uint64", "uint16", "int16":
					return true
				}
			}
		}
	}
	return false
}
