package main

import (
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the table of BENCHMARKS.md from testdata/bench/results.json")

// TestBenchmarksTable checks that the table of BENCHMARKS.md is what
// render makes of testdata/bench/results.json, the file go run
// ./internal/benchdoc writes; -update rewrites the table.
func TestBenchmarksTable(t *testing.T) {
	root := filepath.Join("..", "..")
	b, err := os.ReadFile(filepath.Join(root, "testdata", "bench", "results.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r Results
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Rows) == 0 || r.Date == "" || r.CPU == "" || len(r.Kernels) == 0 {
		t.Fatalf("results.json has no rows, date, CPU or kernels: %+v", r)
	}
	path := filepath.Join(root, "BENCHMARKS.md")
	doc, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	want, err := splice(string(doc), render(r))
	if err != nil {
		t.Fatal(err)
	}
	if *update {
		if err := os.WriteFile(path, []byte(want), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	if want != string(doc) {
		t.Errorf("BENCHMARKS.md's table is not what results.json renders; rerun go test ./internal/benchdoc -run TestBenchmarksTable -update")
	}
}

func TestSpliceRefusesMissingMarks(t *testing.T) {
	for _, doc := range []string{"", beginMark + "\n", endMark + "\n" + beginMark + "\n", beginMark + "\n" + beginMark + "\n" + endMark + "\n"} {
		if _, err := splice(doc, "x"); err == nil {
			t.Errorf("splice(%q) = nil error; want one", doc)
		}
	}
	got, err := splice("a\n"+beginMark+"\nold\n"+endMark+"\nb\n", beginMark+"\nnew\n"+endMark+"\n")
	if want := "a\n" + beginMark + "\nnew\n" + endMark + "\nb\n"; err != nil || got != want {
		t.Errorf("splice = %q, %v; want %q", got, err, want)
	}
}

func TestRatio(t *testing.T) {
	// plumb 3 s against 1.5 s is twice the time; 10 GFLOP/s against 100 is ten times.
	if got := ratio(Measure{Seconds: 3}, Measure{Seconds: 1.5}); got != "2.00" {
		t.Errorf("ratio of times = %q; want 2.00", got)
	}
	if got := ratio(Measure{GFLOPS: 10}, Measure{GFLOPS: 100}); got != "10.00" {
		t.Errorf("ratio of rates = %q; want 10.00", got)
	}
	if got := quantity(Measure{}); !strings.Contains(got, "—") {
		t.Errorf("quantity of nothing = %q; want a dash", got)
	}
}
