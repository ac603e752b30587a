// Command benchdoc measures every speed figure plumb's documentation
// states and renders them as the table of BENCHMARKS.md. It is a tool of
// the repository, not installed for users. From the repository root:
//
//	go run ./internal/benchdoc [-n 3] [-python /usr/bin/python3] [-coretypes SkylakeX,]
//	go test ./internal/benchdoc -run TestBenchmarksTable -update
//
// The first builds plumb, generates the inputs with plumb gen, runs every
// case -n times in alternation (plumb, then numpy under each OpenBLAS
// kernel of -coretypes, then again), and writes the medians to
// testdata/bench/results.json; the second renders that file into
// BENCHMARKS.md. The numpy side is numpy_bench.py in this directory, run
// with the environment the command was given (LD_LIBRARY_PATH chooses the
// BLAS) plus OPENBLAS_NUM_THREADS=2 and, per kernel, OPENBLAS_CORETYPE
// (an empty name leaves OpenBLAS's own choice). Wall times are of whole
// processes where the figure is about a command, peak memory the
// process's maximum resident set (getrusage).
package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"time"
)

func main() {
	n := flag.Int("n", 3, "repetitions of every case (medians are reported)")
	python := flag.String("python", "/usr/bin/python3", "the Python with numpy")
	cores := flag.String("coretypes", "SkylakeX,", "OPENBLAS_CORETYPE values for the numpy runs, comma-separated (empty: OpenBLAS's own choice)")
	out := flag.String("out", filepath.FromSlash("testdata/bench/results.json"), "the results file")
	flag.Parse()
	if err := run(*n, *python, strings.Split(*cores, ","), *out); err != nil {
		fmt.Fprintln(os.Stderr, "benchdoc:", err)
		os.Exit(1)
	}
}

// A sample is one timed process: wall seconds, the seconds the program
// reports for its own computation (0 if none), peak resident MiB.
type sample struct {
	Wall, Inner, MiB float64
	Stdout           []byte
}

// exe runs a command in dir with extra environment and measures it.
func exe(dir string, env []string, name string, args ...string) (sample, error) {
	c := exec.Command(name, args...)
	c.Dir = dir
	c.Env = append(os.Environ(), env...)
	var so, se bytes.Buffer
	c.Stdout, c.Stderr = &so, &se
	t0 := time.Now()
	err := c.Run()
	s := sample{Wall: time.Since(t0).Seconds(), Stdout: so.Bytes()}
	if err != nil {
		return s, fmt.Errorf("%s %s: %v: %s", name, strings.Join(args, " "), err, se.Bytes())
	}
	if ru, ok := c.ProcessState.SysUsage().(*syscall.Rusage); ok {
		s.MiB = float64(ru.Maxrss) / 1024 // kilobytes on Linux
	}
	return s, nil
}

func median(x []float64) float64 {
	y := slices.Clone(x)
	slices.Sort(y)
	if len(y) == 0 {
		return 0
	}
	if len(y)%2 == 1 {
		return y[len(y)/2]
	}
	return (y[len(y)/2-1] + y[len(y)/2]) / 2
}

// Measure is the medians of one side of a row.
type Measure struct {
	Label   string  `json:"label"`
	Seconds float64 `json:"seconds,omitempty"`
	GFLOPS  float64 `json:"gflops,omitempty"`
	MiB     float64 `json:"peak_mib,omitempty"`
}

// Row is one figure: plumb's measure, the others it is compared with.
type Row struct {
	Name    string    `json:"name"`
	Command string    `json:"command"`
	Plumb   Measure   `json:"plumb"`
	Others  []Measure `json:"others"`
}

// Results is the file the table is rendered from.
type Results struct {
	Date        string   `json:"date"`
	CPU         string   `json:"cpu"`
	Cores       int      `json:"cores"`
	Go          string   `json:"go"`
	Numpy       string   `json:"numpy"`
	BLAS        string   `json:"blas"`
	Kernels     []string `json:"kernels"`
	Repetitions int      `json:"repetitions"`
	Rows        []Row    `json:"rows"`
}

// acc gathers samples under a key.
type acc map[string][]sample

func (a acc) wall(k string) float64 {
	return median(pick(a[k], func(s sample) float64 { return s.Wall }))
}
func (a acc) inner(k string) float64 {
	return median(pick(a[k], func(s sample) float64 { return s.Inner }))
}
func (a acc) mib(k string) float64 {
	return median(pick(a[k], func(s sample) float64 { return s.MiB }))
}

func pick(s []sample, f func(sample) float64) []float64 {
	var r []float64
	for _, x := range s {
		r = append(r, f(x))
	}
	return r
}

// cpuModel describes the processor by its architecture and the vector
// extensions the kernels care about, read from /proc/cpuinfo's flags (the
// vendor's model string is left out on purpose: the figures are about the
// instruction set and the core count).
func cpuModel() string {
	b, _ := os.ReadFile("/proc/cpuinfo")
	for _, l := range strings.Split(string(b), "\n") {
		if k, v, ok := strings.Cut(l, ":"); ok && strings.TrimSpace(k) == "flags" {
			have := map[string]bool{}
			for _, f := range strings.Fields(v) {
				have[f] = true
			}
			var ext []string
			for _, f := range []string{"avx2", "fma", "avx512f"} {
				if have[f] {
					ext = append(ext, strings.ToUpper(f))
				}
			}
			if len(ext) == 0 {
				return runtime.GOARCH
			}
			return runtime.GOARCH + " with " + strings.Join(ext, ", ")
		}
	}
	return runtime.GOARCH
}

func kernelName(core string) string {
	if core == "" {
		return "auto"
	}
	return core
}

var benchLine = regexp.MustCompile(`^(Benchmark\S+?)(-\d+)?\s+\d+\s+([\d.]+) ns/op`)

// goBench runs a compiled test binary's benchmarks once and returns seconds per op by name.
func goBench(bin, pattern string) (map[string]float64, error) {
	s, err := exe(filepath.Dir(bin), nil, bin, "-test.run", "^$", "-test.bench", pattern, "-test.benchtime", "1x")
	if err != nil {
		return nil, err
	}
	r := map[string]float64{}
	for _, l := range strings.Split(string(s.Stdout), "\n") {
		if m := benchLine.FindStringSubmatch(l); m != nil {
			ns, _ := strconv.ParseFloat(m[3], 64)
			r[m[1]] = ns / 1e9
		}
	}
	return r, nil
}

func run(n int, python string, cores []string, out string) error {
	root, err := os.Getwd()
	if err != nil {
		return err
	}
	script := filepath.Join(root, "internal", "benchdoc", "numpy_bench.py")
	tmp, err := os.MkdirTemp("", "benchdoc")
	if err != nil {
		return err
	}
	defer os.RemoveAll(tmp)
	plumb := filepath.Join(tmp, "plumb")
	logf := func(f string, a ...any) { fmt.Fprintf(os.Stderr, f+"\n", a...) }
	logf("building plumb and the benchmark binaries in %s", tmp)
	if _, err := exe(root, nil, "go", "build", "-o", plumb, "./cmd/plumb"); err != nil {
		return err
	}
	bins := map[string]string{}
	for _, p := range []string{"attention", "ffn", "kvcache"} {
		bins[p] = filepath.Join(tmp, p+".test")
		if _, err := exe(root, nil, "go", "test", "-c", "-o", bins[p], "./"+p); err != nil {
			return err
		}
	}
	gen := func(name, shape string, seed int, extra ...string) error {
		args := append([]string{"gen", "-quiet", "-shape", shape, "-seed", strconv.Itoa(seed)}, extra...)
		_, err := exe(tmp, nil, plumb, append(args, name)...)
		return err
	}
	for i, f := range []string{"q", "k", "v"} {
		if err := gen(f+".npy", "1,16,2048,128", i+1); err != nil {
			return err
		}
	}
	if err := gen("x.npy", "4096,4096", 4); err != nil {
		return err
	}
	for i, f := range []string{"w1", "v1", "w2"} {
		shape := "4096,11008"
		if f == "w2" {
			shape = "11008,4096"
		}
		if err := gen(f+".npy", shape, 5+i, "-std", "0.02"); err != nil {
			return err
		}
	}
	write := func(name, s string) error { return os.WriteFile(filepath.Join(tmp, name), []byte(s), 0o644) }
	if err := write("attn.json", `{"version": 1, "mask": [{"kind": "causal"}]}`); err != nil {
		return err
	}
	if err := write("ffn.json", `{"version": 1, "activation": "silu", "gated": true, "layout": "in-by-out"}`); err != nil {
		return err
	}
	attnRun := []string{"run", "attention-forward", "-quiet", "-config", "attn.json", "q=q.npy", "k=k.npy", "v=v.npy", "-out", "ref"}
	attnCheck := []string{"check", "attention-forward", "-config", "attn.json", "q=q.npy", "k=k.npy", "v=v.npy", "-got", "out=port.npy"}
	ffnRun := []string{"run", "ffn-forward", "-quiet", "-config", "ffn.json", "x=x.npy", "w1=w1.npy", "v=v1.npy", "w2=w2.npy", "-out", "ffnref"}
	numpyEnv := func(core string) []string { return []string{"OPENBLAS_NUM_THREADS=2", "OPENBLAS_CORETYPE=" + core} }
	a := acc{}
	res := Results{Date: time.Now().UTC().Format("2006-01-02"), CPU: cpuModel(), Cores: runtime.NumCPU(), Go: runtime.Version(), Repetitions: n}
	for _, c := range cores {
		res.Kernels = append(res.Kernels, kernelName(c))
	}
	kernel := map[string]string{}
	np := func(key, core string, args ...string) error {
		s, err := exe(tmp, numpyEnv(core), python, append([]string{script}, args...)...)
		if err != nil {
			return err
		}
		var j map[string]any
		if err := json.Unmarshal(s.Stdout, &j); err != nil {
			return fmt.Errorf("numpy_bench.py %s: %v", args[0], err)
		}
		kernel[kernelName(core)], _ = j["kernel"].(string)
		res.Numpy, _ = j["numpy"].(string)
		if v, ok := j["compute_s"].(float64); ok {
			s.Inner = v
		}
		a[key] = append(a[key], s)
		for k, v := range j {
			if f, ok := v.(float64); ok && k != "compute_s" {
				a[key+"/"+k] = append(a[key+"/"+k], sample{Wall: f})
			}
		}
		return nil
	}
	pl := func(key string, args ...string) error {
		s, err := exe(tmp, nil, plumb, args...)
		if err != nil && !strings.HasPrefix(args[0], "check") {
			return err
		}
		if err != nil {
			return fmt.Errorf("plumb check failed on numpy's float32 output: %v", err)
		}
		a[key] = append(a[key], s)
		return nil
	}
	for rep := 1; rep <= n; rep++ {
		logf("round %d of %d", rep, n)
		if err := pl("attn/plumb", attnRun...); err != nil {
			return err
		}
		for _, c := range cores {
			if err := np("attn/np/"+kernelName(c), c, "attention", "q.npy", "k.npy", "v.npy", "port.npy"); err != nil {
				return err
			}
		}
		if err := pl("attn/direct", append([]string{"run", "-direct"}, attnRun[1:]...)...); err != nil {
			return err
		}
		if err := pl("attn/check", attnCheck...); err != nil {
			return err
		}
		if err := pl("ffn/plumb", ffnRun...); err != nil {
			return err
		}
		for _, c := range cores {
			if err := np("ffn/np/"+kernelName(c), c, "ffn", "x.npy", "w1.npy", "v1.npy", "w2.npy", "ffnout.npy"); err != nil {
				return err
			}
		}
		for pkg, pat := range map[string]string{
			"attention": "^Benchmark(ForwardFastCausal|ForwardFastFull|BackwardFastCausal|DecodeFast)$",
			"ffn":       "^Benchmark(Forward|ForwardFast|BackwardFast)$",
			"kvcache":   "^BenchmarkDecode(Paged|Contiguous)$",
		} {
			r, err := goBench(bins[pkg], pat)
			if err != nil {
				return err
			}
			for k, v := range r {
				a["go/"+pkg+"/"+k] = append(a["go/"+pkg+"/"+k], sample{Wall: v})
			}
		}
		for _, c := range cores {
			if err := np("kern/"+kernelName(c), c, "kernels"); err != nil {
				return err
			}
		}
		res.Repetitions = rep
		if err := save(a, res, kernel, out); err != nil {
			return err
		}
	}
	return nil
}

// save writes the medians of the rounds so far to out.
func save(a acc, res Results, kernel map[string]string, out string) error {
	blas := ""
	for _, k := range res.Kernels {
		blas += fmt.Sprintf("%s → %s; ", k, kernel[k])
	}
	res.BLAS = "OpenBLAS 0.3.21, 2 threads, OPENBLAS_CORETYPE " + strings.TrimSuffix(blas, "; ")
	res.Rows = rows(a, res.Kernels)
	b, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Dir(out), 0o755); err != nil {
		return err
	}
	return os.WriteFile(out, append(b, '\n'), 0o644)
}

// flops of the attention benchmarks: 2 per multiply-add, the products of
// the visible (query, key) pairs only; B 1, H 16, D 128.
func attnFlops(pairs float64, products float64) float64 { return products * 2 * 16 * 128 * pairs }

const L = 2048

var causalPairs = float64(L*(L+1)) / 2

func rows(a acc, kernels []string) []Row {
	others := func(prefix string) []Measure {
		var m []Measure
		for _, k := range kernels {
			m = append(m, Measure{Label: "numpy " + k, Seconds: a.wall(prefix + k), MiB: a.mib(prefix + k)})
		}
		return m
	}
	inMem := func(field string, flops float64) []Measure {
		var m []Measure
		for _, k := range kernels {
			s := a.wall("kern/" + k + "/" + field)
			x := Measure{Label: "numpy " + k, Seconds: s}
			if flops > 0 {
				x.GFLOPS = flops / s / 1e9
			}
			m = append(m, x)
		}
		return m
	}
	goRow := func(name, cmd, key string, flops float64, vs []Measure) Row {
		s := a.wall(key)
		p := Measure{Label: "plumb", Seconds: s}
		if flops > 0 {
			p.GFLOPS = flops / s / 1e9
		}
		return Row{Name: name, Command: cmd, Plumb: p, Others: vs}
	}
	var dg []Measure
	for _, k := range kernels {
		dg = append(dg, Measure{Label: "numpy " + k, GFLOPS: a.wall("kern/" + k + "/dgemm_gflops")})
	}
	paged := goRow("kvcache decode, paged (pages of 16, 65536 positions)", "go test -bench DecodePaged ./kvcache", "go/kvcache/BenchmarkDecodePaged", 0, nil)
	paged.Others = []Measure{{Label: "contiguous", Seconds: a.wall("go/kvcache/BenchmarkDecodeContiguous")}}
	ffnFast := goRow("ffn.ForwardFast, SwiGLU 16 rows, 1024 → 2816", "go test -bench ForwardFast ./ffn", "go/ffn/BenchmarkForwardFast", 3*2*16*1024*2816, nil)
	ffnFast.Others = []Measure{{Label: "ffn.Forward (direct)", Seconds: a.wall("go/ffn/BenchmarkForward")}}
	return []Row{
		{Name: "plumb run attention-forward, causal, B 1, H 16, L 2048, D 128", Command: "plumb run attention-forward (whole process)",
			Plumb:  Measure{Label: "plumb", Seconds: a.wall("attn/plumb"), MiB: a.mib("attn/plumb")},
			Others: others("attn/np/")},
		{Name: "plumb run -direct attention-forward, the same problem with the direct form", Command: "plumb run -direct attention-forward (whole process)",
			Plumb:  Measure{Label: "plumb -direct", Seconds: a.wall("attn/direct"), MiB: a.mib("attn/direct")},
			Others: []Measure{{Label: "plumb run", Seconds: a.wall("attn/plumb"), MiB: a.mib("attn/plumb")}}},
		{Name: "plumb check attention-forward (float32 port output, yardstick)", Command: "plumb check attention-forward (whole process)",
			Plumb:  Measure{Label: "plumb check", Seconds: a.wall("attn/check"), MiB: a.mib("attn/check")},
			Others: []Measure{{Label: "plumb run", Seconds: a.wall("attn/plumb"), MiB: a.mib("attn/plumb")}}},
		{Name: "plumb run ffn-forward, SwiGLU, 4096 rows, 4096 → 11008 → 4096", Command: "plumb run ffn-forward (whole process)",
			Plumb:  Measure{Label: "plumb", Seconds: a.wall("ffn/plumb"), MiB: a.mib("ffn/plumb")},
			Others: others("ffn/np/")},
		goRow("attention.ForwardFast, causal, L 2048", "go test -bench ForwardFastCausal ./attention", "go/attention/BenchmarkForwardFastCausal", attnFlops(causalPairs, 2), inMem("forward_causal_s", attnFlops(L*L, 2))),
		goRow("attention.ForwardFast, no mask, L 2048", "go test -bench ForwardFastFull ./attention", "go/attention/BenchmarkForwardFastFull", attnFlops(L*L, 2), inMem("forward_full_s", attnFlops(L*L, 2))),
		goRow("attention.BackwardFast, causal, L 2048", "go test -bench BackwardFastCausal ./attention", "go/attention/BenchmarkBackwardFastCausal", attnFlops(causalPairs, 5), nil),
		goRow("attention.ForwardFast, decode, Lk 32768", "go test -bench DecodeFast ./attention", "go/attention/BenchmarkDecodeFast", attnFlops(32768, 2), inMem("decode_s", attnFlops(32768, 2))),
		ffnFast,
		{Name: "ffn.BackwardFast, SwiGLU 16 rows, 1024 → 2816", Command: "go test -bench BackwardFast ./ffn", Plumb: Measure{Label: "plumb", Seconds: a.wall("go/ffn/BenchmarkBackwardFast")}},
		paged,
		{Name: "dgemm 2048 × 2048 × 2048", Command: "numpy_bench.py kernels", Others: dg, Plumb: Measure{Label: "plumb"}},
		{Name: "(numpy's own compute time of the two whole-process rows)", Command: "numpy_bench.py attention, numpy_bench.py ffn",
			Others: func() []Measure {
				var m []Measure
				for _, k := range kernels {
					m = append(m, Measure{Label: "attention, numpy " + k, Seconds: a.inner("attn/np/" + k)}, Measure{Label: "ffn, numpy " + k, Seconds: a.inner("ffn/np/" + k)})
				}
				return m
			}()},
	}
}
