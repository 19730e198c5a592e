package server

import (
	"math"
	"sync"
	"testing"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// sameBits reports whether a and b hold the same float64 values bit for
// bit.
func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// TestFugacityMatchesEOS checks that the RPC returns exactly the numbers of
// a direct eos.Mixture.Fugacity call, for every model and root choice,
// with all derivatives.
func TestFugacityMatchesEOS(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	ids := []string{"methane", "ethane", "propane"}
	var comps []component.Component
	for _, id := range ids {
		c, err := component.Lookup(id)
		if err != nil {
			t.Fatal(err)
		}
		comps = append(comps, c)
	}
	models := map[fugadv1.Model]eos.Model{fugadv1.Model_MODEL_PR76: eos.PR76, fugadv1.Model_MODEL_PR78: eos.PR78, fugadv1.Model_MODEL_SRK: eos.SRK}
	roots := map[fugadv1.RootChoice]eos.RootChoice{
		fugadv1.RootChoice_ROOT_CHOICE_VAPOUR: eos.RootVapour, fugadv1.RootChoice_ROOT_CHOICE_LIQUID: eos.RootLiquid,
		fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS: eos.RootMinGibbs,
	}
	// A cold liquid-like state (three roots likely) and a warm gas state.
	states := []struct{ T, P float64 }{{200, 2e6}, {300, 5e6}}
	for wm, em := range models {
		mx, err := eos.NewMixture(em, comps, eos.Options{})
		if err != nil {
			t.Fatal(err)
		}
		ws, out := mx.NewWorkspace(), mx.NewFugacity()
		for wr, er := range roots {
			for _, st := range states {
				req := &fugadv1.FugacityCoefficientsRequest{
					Fluid: fluidOf(wm, ids...), TemperatureK: st.T, PressurePa: st.P, MoleFractions: gasX, Root: wr,
					TemperatureDerivatives: true, PressureDerivatives: true, CompositionDerivatives: true,
				}
				got, err := e.client.FugacityCoefficients(ctx, req)
				if err != nil {
					t.Fatalf("%v %v %v: %v", wm, wr, st, err)
				}
				if err := mx.Fugacity(ws, st.T, st.P, gasX, er, eos.WantAll, out); err != nil {
					t.Fatal(err)
				}
				if !sameBits(got.GetLnFugacityCoefficients(), out.LnPhi) || !sameBits(got.GetDLnPhiDTemperaturePerK(), out.DT) ||
					!sameBits(got.GetDLnPhiDPressurePerPa(), out.DP) || !sameBits(got.GetDLnPhiDMolesPerMol(), out.DN) ||
					!sameBits([]float64{got.GetCompressibilityFactor(), got.GetMolarVolumeM3PerMol()}, []float64{out.Z, out.V}) {
					t.Errorf("%v %v T=%g P=%g: RPC and direct eos differ:\n rpc %v\n eos %v", wm, wr, st.T, st.P, got.GetLnFugacityCoefficients(), out.LnPhi)
				}
				if got.GetRoot() != rootFound(out.Branch) || int(got.GetRealRootCount()) != out.Roots {
					t.Errorf("root %v/%d, eos %v/%d", got.GetRoot(), got.GetRealRootCount(), out.Branch, out.Roots)
				}
			}
		}
	}
}

// TestFugacityDerivativesOnRequest checks that derivatives are sent only
// when asked for, and that ∂ln φ/∂n obeys Gibbs–Duhem, Σ_i x_i ∂ln φ_i/∂n_j
// = 0 (Michelsen & Mollerup 2007, ch. 2), on the wire.
func TestFugacityDerivativesOnRequest(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	plain, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if err != nil {
		t.Fatal(err)
	}
	if len(plain.GetDLnPhiDTemperaturePerK())+len(plain.GetDLnPhiDPressurePerPa())+len(plain.GetDLnPhiDMolesPerMol()) != 0 {
		t.Errorf("derivatives sent without being asked for")
	}
	r := fugacityReq()
	r.CompositionDerivatives = true
	d, err := e.client.FugacityCoefficients(ctx, r)
	if err != nil {
		t.Fatal(err)
	}
	n := len(gasX)
	dn := d.GetDLnPhiDMolesPerMol()
	if len(dn) != n*n {
		t.Fatalf("%d composition derivatives, want %d", len(dn), n*n)
	}
	for j := range n {
		s, scale := 0.0, 0.0
		for i := range n {
			s += gasX[i] * dn[i*n+j]
			scale += math.Abs(gasX[i] * dn[i*n+j])
		}
		if math.Abs(s) > 1e-12*max(scale, 1) {
			t.Errorf("Gibbs–Duhem column %d: Σ x_i ∂lnφ_i/∂n_j = %g", j, s)
		}
	}
	if r := d.GetReport(); r.GetLnPhiEvaluations() != 1 || !r.GetConverged() || r.GetDataVersion() == "" || r.GetModelVersion() == "" {
		t.Errorf("report %v", r)
	}
}

// TestFugacityConcurrent runs identical calls concurrently (run with
// -race) and demands identical bytes: deterministic across goroutines and
// pooled workspaces.
func TestFugacityConcurrent(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 64}})
	ctx := testCtx(t)
	r := fugacityReq()
	r.TemperatureDerivatives, r.PressureDerivatives, r.CompositionDerivatives = true, true, true
	want, err := e.client.FugacityCoefficients(ctx, r)
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make(chan error, 16)
	for g := range 16 {
		wg.Go(func() {
			req := fugacityReq()
			req.TemperatureDerivatives, req.PressureDerivatives, req.CompositionDerivatives = true, true, true
			if g%2 == 1 { // a different fluid in between, sharing nothing
				other := fugacityReq()
				other.Fluid.Model = fugadv1.Model_MODEL_SRK
				if _, err := e.client.FugacityCoefficients(ctx, other); err != nil {
					errs <- err
					return
				}
			}
			for range 20 {
				got, err := e.client.FugacityCoefficients(ctx, req)
				if err != nil {
					errs <- err
					return
				}
				if !sameBits(got.GetLnFugacityCoefficients(), want.GetLnFugacityCoefficients()) ||
					!sameBits(got.GetDLnPhiDMolesPerMol(), want.GetDLnPhiDMolesPerMol()) {
					errs <- errMismatch
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}

var errMismatch = errInternal("concurrent result differs")

// TestDiscovery checks ListModels against exact facts of the cubics and
// ListComponents against the component library.
func TestDiscovery(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	ms, err := e.client.ListModels(ctx, &fugadv1.ListModelsRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ms.GetModels()) != 3 {
		t.Fatalf("%d models, want 3", len(ms.GetModels()))
	}
	for _, m := range ms.GetModels() {
		// Exact model facts: Zc = 1/3 for SRK and 0.307401… for
		// Peng–Robinson (Peng & Robinson 1976, from memory to 4 digits).
		want := 0.3074
		if m.GetModel() == fugadv1.Model_MODEL_SRK {
			want = 1.0 / 3
		}
		if math.Abs(m.GetCriticalCompressibility()-want) > 1e-4 {
			t.Errorf("%s: Zc = %v, want %v", m.GetName(), m.GetCriticalCompressibility(), want)
		}
		if m.GetModel() == fugadv1.Model_MODEL_UNSPECIFIED || m.GetReference() == "" {
			t.Errorf("model %v lacks enum or reference", m)
		}
	}
	all, err := e.client.ListComponents(ctx, &fugadv1.ListComponentsRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := len(all.GetComponents()), len(component.All()); got != want || all.GetDataVersion() != component.DataVersion {
		t.Fatalf("%d components version %q, want %d %q", got, all.GetDataVersion(), want, component.DataVersion)
	}
	f, err := e.client.ListComponents(ctx, &fugadv1.ListComponentsRequest{Filter: "CH4"})
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, c := range f.GetComponents() {
		if c.GetId() == "methane" {
			found = true
			// Methane's critical point, 190.56 K and 4.599 MPa (Poling,
			// Prausnitz & O'Connell 2001, App. A; from memory).
			if math.Abs(c.GetCriticalTemperatureK()-190.56) > 0.1 || math.Abs(c.GetCriticalPressurePa()-4.599e6) > 0.01e6 {
				t.Errorf("methane Tc %v Pc %v", c.GetCriticalTemperatureK(), c.GetCriticalPressurePa())
			}
			if c.GetSource() == "" || c.GetFamily() != fugadv1.ComponentFamily_COMPONENT_FAMILY_PARAFFIN {
				t.Errorf("methane source %q family %v", c.GetSource(), c.GetFamily())
			}
		}
	}
	if !found {
		t.Errorf("filter CH4 did not find methane: %v", f.GetComponents())
	}
}

// TestResultCache checks that an identical request is served from the
// cache with the same numbers and from_cache set, that bypass_cache
// skips it, and that a disabled cache never reports a hit.
func TestResultCache(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	first, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if err != nil {
		t.Fatal(err)
	}
	second, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if err != nil {
		t.Fatal(err)
	}
	if first.GetReport().GetFromCache() || !second.GetReport().GetFromCache() {
		t.Errorf("from_cache: first %v, second %v; want false, true", first.GetReport().GetFromCache(), second.GetReport().GetFromCache())
	}
	if !sameBits(first.GetLnFugacityCoefficients(), second.GetLnFugacityCoefficients()) {
		t.Error("cached numbers differ")
	}
	r := fugacityReq()
	r.BypassCache = true
	third, err := e.client.FugacityCoefficients(ctx, r)
	if err != nil {
		t.Fatal(err)
	}
	if third.GetReport().GetFromCache() || !sameBits(first.GetLnFugacityCoefficients(), third.GetLnFugacityCoefficients()) {
		t.Errorf("bypass: from_cache %v", third.GetReport().GetFromCache())
	}
	hits := 0
	for _, en := range e.logs.FilterMessage("call").All() {
		if en.ContextMap()["cache_hits"] == int64(1) {
			hits++
		}
	}
	if hits != 1 {
		t.Errorf("%d call lines with a cache hit, want 1", hits)
	}

	off := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	for range 2 {
		resp, err := off.client.FugacityCoefficients(ctx, fugacityReq())
		if err != nil {
			t.Fatal(err)
		}
		if resp.GetReport().GetFromCache() {
			t.Error("hit with the cache disabled")
		}
	}
}
