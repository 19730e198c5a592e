package eos

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/fugad/fugad/thermo/component"
)

// benchFluid builds an n-component fluid from the library (cycling through
// it with perturbed critical constants past its end) and a fixed-seed
// composition dominated by the lightest components, like a natural gas.
func benchFluid(b *testing.B, n int) (*Mixture, []float64) {
	all := component.All()
	rng := rand.New(rand.NewPCG(1, uint64(n)))
	comps := make([]component.Component, n)
	for i := range n {
		c := all[i%len(all)]
		if i >= len(all) {
			c.ID = fmt.Sprintf("%s-%d", c.ID, i)
			c.Tc *= 1 + 0.01*float64(i/len(all))
		}
		comps[i] = c
	}
	mx, err := NewMixture(PR78, comps, Options{})
	if err != nil {
		b.Fatal(err)
	}
	x := make([]float64, n)
	for i := range x {
		x[i] = rng.Float64() + 0.01
	}
	return mx, x
}

func benchmarkLnPhi(b *testing.B, n int, want Want) {
	mx, x := benchFluid(b, n)
	ws := mx.NewWorkspace()
	f := mx.NewFugacity()
	b.ReportAllocs()
	for b.Loop() {
		if err := mx.Fugacity(ws, 280, 4e6, x, RootMinGibbs, want, f); err != nil {
			b.Fatal(err)
		}
	}
}

func benchmarkLnPhiNewT(b *testing.B, n int) {
	mx, x := benchFluid(b, n)
	ws := mx.NewWorkspace()
	f := mx.NewFugacity()
	T := 280.0
	b.ReportAllocs()
	for b.Loop() {
		T += 1e-9
		if err := mx.Fugacity(ws, T, 4e6, x, RootMinGibbs, 0, f); err != nil {
			b.Fatal(err)
		}
	}
}

func benchmarkProperties(b *testing.B, n int) {
	mx, x := benchFluid(b, n)
	ws := mx.NewWorkspace()
	b.ReportAllocs()
	for b.Loop() {
		if _, err := mx.Properties(ws, 280, 4e6, x, RootMinGibbs); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkLnPhi2(b *testing.B)  { benchmarkLnPhi(b, 2, 0) }
func BenchmarkLnPhi5(b *testing.B)  { benchmarkLnPhi(b, 5, 0) }
func BenchmarkLnPhi10(b *testing.B) { benchmarkLnPhi(b, 10, 0) }
func BenchmarkLnPhi20(b *testing.B) { benchmarkLnPhi(b, 20, 0) }
func BenchmarkLnPhi50(b *testing.B) { benchmarkLnPhi(b, 50, 0) }

func BenchmarkLnPhiNewT10(b *testing.B) { benchmarkLnPhiNewT(b, 10) }
func BenchmarkLnPhiNewT50(b *testing.B) { benchmarkLnPhiNewT(b, 50) }

func BenchmarkLnPhiDerivs2(b *testing.B)  { benchmarkLnPhi(b, 2, WantAll) }
func BenchmarkLnPhiDerivs5(b *testing.B)  { benchmarkLnPhi(b, 5, WantAll) }
func BenchmarkLnPhiDerivs10(b *testing.B) { benchmarkLnPhi(b, 10, WantAll) }
func BenchmarkLnPhiDerivs20(b *testing.B) { benchmarkLnPhi(b, 20, WantAll) }
func BenchmarkLnPhiDerivs50(b *testing.B) { benchmarkLnPhi(b, 50, WantAll) }

func BenchmarkProperties2(b *testing.B)  { benchmarkProperties(b, 2) }
func BenchmarkProperties5(b *testing.B)  { benchmarkProperties(b, 5) }
func BenchmarkProperties10(b *testing.B) { benchmarkProperties(b, 10) }
func BenchmarkProperties20(b *testing.B) { benchmarkProperties(b, 20) }
func BenchmarkProperties50(b *testing.B) { benchmarkProperties(b, 50) }
