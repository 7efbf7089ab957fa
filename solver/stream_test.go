package solver

import (
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
	"testing"
	"time"
)

// This file measures the machine's sustainable memory bandwidth with the triad kernel of the
// STREAM benchmark, a[i] = b[i] + s·c[i] (J. D. McCalpin, "Memory bandwidth and machine balance
// in current high performance computers", IEEE Computer Society TCCA Newsletter, Dec. 1995).
// Bytes are counted as STREAM counts them: 24 per element, two 8-byte reads and one 8-byte
// write; the write-allocate read of a that most caches also do is not counted. The peer
// comparison (peer_test.go) divides the bytes a solve must move by this figure to get the time
// the solve would take at full memory speed.

// triadElems is the length of each of the three triad arrays: 10.5 million float64, 84 MB per
// array and 252 MB in all, far beyond the caches of the machines this runs on, so that the
// kernel streams from memory (STREAM's rule is at least four times the last-level cache).
const triadElems = 10_500_000

// triadBytesPerElem is STREAM's byte count of one triad element: read b[i] and c[i], write a[i].
const triadBytesPerElem = 24

// triad holds the three arrays of the triad kernel and the number of goroutines that share it.
type triad struct {
	a, b, c []float64
	workers int
}

// newTriad allocates three arrays of n elements and touches every page from the goroutine that
// will later stream that part, so that the pages are placed where they are used.
func newTriad(n, workers int) *triad {
	if n < 1 || workers < 1 {
		panic(fmt.Sprintf("solver: newTriad: n and workers must be >= 1, got %d and %d", n, workers))
	}
	t := &triad{a: make([]float64, n), b: make([]float64, n), c: make([]float64, n), workers: workers}
	t.parallel(func(lo, hi int) {
		for i := lo; i < hi; i++ {
			t.a[i], t.b[i], t.c[i] = 0, 1, 2
		}
	})
	return t
}

// parallel calls f on workers contiguous parts of [0, n) at once, the last on the calling
// goroutine, and returns when all are done.
func (t *triad) parallel(f func(lo, hi int)) {
	n := len(t.a)
	var wg sync.WaitGroup
	for w := range t.workers - 1 {
		wg.Go(func() { f(w*n/t.workers, (w+1)*n/t.workers) })
	}
	f((t.workers-1)*n/t.workers, n)
	wg.Wait()
}

// run does one triad a = b + s·c over all elements.
func (t *triad) run(s float64) {
	t.parallel(func(lo, hi int) { triadRange(t.a[lo:hi], t.b[lo:hi], t.c[lo:hi], s) })
}

// triadRange computes a[i] = b[i] + s·c[i]; b and c must be at least as long as a.
func triadRange(a, b, c []float64, s float64) {
	b, c = b[:len(a)], c[:len(a)]
	for i := range a {
		a[i] = b[i] + s*c[i]
	}
}

// bytes returns the STREAM byte count of one run.
func (t *triad) bytes() float64 { return triadBytesPerElem * float64(len(t.a)) }

// measureTriad returns the median bandwidth, bytes per second, of reps triads over arrays of n
// elements on the given number of goroutines, after one untimed warm-up run, and every
// measurement in the order taken.
func measureTriad(n, workers, reps int) (median float64, all []float64) {
	t := newTriad(n, workers)
	t.run(3)
	for range reps {
		start := time.Now()
		t.run(3)
		all = append(all, t.bytes()/time.Since(start).Seconds())
	}
	return peerMedian(all), all
}

// peerMedian returns the median of xs (the mean of the middle two for an even count), or NaN
// for none. xs is not changed.
func peerMedian(xs []float64) float64 {
	if len(xs) == 0 {
		return math.NaN()
	}
	s := slices.Clone(xs)
	slices.Sort(s)
	m := len(s) / 2
	if len(s)%2 == 1 {
		return s[m]
	}
	return (s[m-1] + s[m]) / 2
}

func TestTriadComputes(t *testing.T) {
	cases := []struct {
		name       string
		n, workers int
	}{
		{"one worker", 7, 1},
		{"split evenly", 8, 2},
		{"uneven split", 11, 3},
		{"more workers than elements", 3, 5},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tr := newTriad(tc.n, tc.workers)
			for i := range tr.b {
				tr.b[i], tr.c[i] = float64(i), float64(2*i+1)
			}
			tr.run(0.5)
			for i, got := range tr.a {
				// Exact: small integers and halves are represented exactly.
				if want := float64(i) + 0.5*float64(2*i+1); got != want {
					t.Errorf("a[%d] = %g, want %g", i, got, want)
				}
			}
			if got, want := tr.bytes(), float64(24*tc.n); got != want {
				t.Errorf("bytes() = %g, want %g", got, want)
			}
		})
	}
}

func TestPeerMedian(t *testing.T) {
	cases := []struct {
		xs   []float64
		want float64
	}{
		{[]float64{3}, 3},
		{[]float64{5, 1, 3}, 3},
		{[]float64{4, 1, 3, 2}, 2.5},
	}
	for _, tc := range cases {
		t.Run(fmt.Sprint(tc.xs), func(t *testing.T) {
			if got := peerMedian(tc.xs); got != tc.want {
				t.Errorf("peerMedian(%v) = %g, want %g", tc.xs, got, tc.want)
			}
		})
	}
	if got := peerMedian(nil); !math.IsNaN(got) {
		t.Errorf("peerMedian(nil) = %g, want NaN", got)
	}
}

// BenchmarkTriad measures the memory bandwidth of the triad kernel on GOMAXPROCS goroutines (the
// number the multigrid kernels use) over three 84 MB arrays. MB/s is STREAM's count; GB/s
// reports the same figure in 10⁹ bytes per second.
func BenchmarkTriad(b *testing.B) {
	workers := runtime.GOMAXPROCS(0)
	b.Run(fmt.Sprintf("workers=%d", workers), func(b *testing.B) {
		t := newTriad(triadElems, workers)
		b.SetBytes(int64(t.bytes()))
		b.ReportAllocs()
		for b.Loop() {
			t.run(3)
		}
		b.ReportMetric(t.bytes()*float64(b.N)/b.Elapsed().Seconds()/1e9, "GB/s")
	})
}
