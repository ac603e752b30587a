package golden

import (
	"fmt"
	"maps"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/vocab"
)

// Words records which words of each convention the decoded configurations
// of a package's golden cases hold, so that a test can require every word
// to be exercised by at least one 50-digit case: a value added to a
// convention then fails the package's golden test until its generator
// family writes a case for it.
type Words struct {
	seen map[string]map[string]bool // convention name → words seen
}

// Note records every field of a convention type in cfg, a decoded
// configuration (a struct, walked through nested structs, pointers and
// slices).
func (w *Words) Note(cfg any) {
	if w.seen == nil {
		w.seen = map[string]map[string]bool{}
	}
	w.walk(reflect.ValueOf(cfg))
}

// NoteFamilies notes the configuration of every case of the golden
// families of pkg, each decoded into a new value of its family's type
// (configs maps a family to a function returning a pointer to one); a
// case that does not decode fails the test.
func (w *Words) NoteFamilies(tb testing.TB, pkg string, configs map[string]func() any) {
	tb.Helper()
	for fam, cfg := range configs {
		for _, c := range MustLoadFamily(tb, pkg, fam).Cases {
			v := cfg()
			if err := c.DecodeConfig(v); err != nil {
				tb.Fatal(err)
			}
			w.Note(v)
		}
	}
}

func (w *Words) walk(v reflect.Value) {
	switch v.Kind() {
	case reflect.Pointer, reflect.Interface:
		if !v.IsNil() {
			w.walk(v.Elem())
		}
		return
	case reflect.Struct:
		for i := range v.NumField() {
			if v.Type().Field(i).IsExported() {
				w.walk(v.Field(i))
			}
		}
		return
	case reflect.Slice, reflect.Array:
		for i := range v.Len() {
			w.walk(v.Index(i))
		}
		return
	}
	if e, ok := vocab.Lookup(v.Type()); ok {
		if w.seen[e.Name] == nil {
			w.seen[e.Name] = map[string]bool{}
		}
		w.seen[e.Name][fmt.Sprint(v.Interface())] = true
	}
}

// Require fails tb for every convention the configurations hold where some
// word appears in no case, naming the words. Conventions that no
// configuration holds are not checked: the package's test names the ones
// it must cover in want (by Go type name, "attention.GroupMap"), and those
// must all appear.
func (w *Words) Require(tb testing.TB, want ...string) {
	tb.Helper()
	for _, n := range want {
		if w.seen[n] == nil {
			tb.Errorf("no golden case holds a value of %s; its words are exercised by none", n)
		}
	}
	names := slices.Sorted(maps.Keys(w.seen))
	for _, e := range vocab.All() {
		if !slices.Contains(names, e.Name) {
			continue
		}
		var missing []string
		for _, t := range e.Words {
			if !w.seen[e.Name][t.Text] {
				missing = append(missing, t.Text)
			}
		}
		if len(missing) > 0 {
			tb.Errorf("%s: no golden case uses %s; add a case to the generator family (testdata/gen)", e.Name, strings.Join(missing, ", "))
		}
	}
}
