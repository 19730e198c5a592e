package server

import (
	"context"
	"errors"
	"time"

	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/eos"
)

// eosRoot maps the wire root choice to the eos one.
func eosRoot(r fugadv1.RootChoice) (eos.RootChoice, bool) {
	switch r {
	case fugadv1.RootChoice_ROOT_CHOICE_VAPOUR:
		return eos.RootVapour, true
	case fugadv1.RootChoice_ROOT_CHOICE_LIQUID:
		return eos.RootLiquid, true
	case fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS:
		return eos.RootMinGibbs, true
	}
	return 0, false
}

// rootFound maps the eos branch to the wire enum.
func rootFound(b eos.Branch) fugadv1.RootFound {
	switch b {
	case eos.BranchVapour:
		return fugadv1.RootFound_ROOT_FOUND_VAPOUR
	case eos.BranchLiquid:
		return fugadv1.RootFound_ROOT_FOUND_LIQUID
	}
	return fugadv1.RootFound_ROOT_FOUND_SINGLE
}

// fluidComponentCount returns the number of components to validate
// per-component arrays against, or −1 when the fluid is too broken to say.
func (s *Server) fluidComponentCount(fl *fugadv1.Fluid) int {
	n := len(fl.GetComponents())
	if n == 0 || n > s.cfg.MaxComponents {
		return -1
	}
	return n
}

// FugacityCoefficients evaluates ln φ_i of one phase and, on request, its
// analytic derivatives, with eos.Mixture.Fugacity (Michelsen & Mollerup,
// Thermodynamic Models: Fundamentals & Computational Aspects, 2nd ed.,
// 2007, ch. 2–3).
func (s *Server) FugacityCoefficients(ctx context.Context, req *fugadv1.FugacityCoefficientsRequest) (*fugadv1.FugacityCoefficientsResponse, error) {
	info(ctx).states.Add(1)
	var v violations
	fc := s.checkFluid(&v, "fluid", req.GetFluid())
	checkTemperature(&v, "temperature_k", req.GetTemperatureK())
	checkPressure(&v, "pressure_pa", req.GetPressurePa())
	var x []float64
	if n := s.fluidComponentCount(req.GetFluid()); n > 0 {
		x = composition(&v, "mole_fractions", req.GetMoleFractions(), n)
	}
	root, ok := eosRoot(req.GetRoot())
	if !ok {
		v.add("root", "required: one of ROOT_CHOICE_VAPOUR, ROOT_CHOICE_LIQUID, ROOT_CHOICE_MINIMUM_GIBBS (got %v)", req.GetRoot())
	}
	if err := v.err(); err != nil {
		return nil, err
	}
	cf, err := s.compiled("fluid", fc)
	if err != nil {
		return nil, err
	}
	solve := func(ctx context.Context) (*fugadv1.FugacityCoefficientsResponse, error) {
		var resp *fugadv1.FugacityCoefficientsResponse
		err := s.inSlot(ctx, "FugacityCoefficients", req, func() error {
			var err error
			resp, err = s.fugacity(cf, req, x, root)
			return err
		})
		return resp, err
	}
	if s.results == nil || req.GetBypassCache() {
		return solve(ctx)
	}
	kb := s.beginKey("fugacity")
	kb.AppendBytes(cf.def)
	kb.AppendFloat64(req.GetTemperatureK())
	kb.AppendFloat64(req.GetPressurePa())
	kb.AppendFloat64s(x)
	kb.AppendInt64(int64(req.GetRoot()))
	kb.AppendBool(req.GetTemperatureDerivatives())
	kb.AppendBool(req.GetPressureDerivatives())
	kb.AppendBool(req.GetCompositionDerivatives())
	raw, hit, err := s.cachedAnswer(ctx, kb, func(ctx context.Context) (proto.Message, error) { return solve(ctx) })
	if err != nil {
		return nil, err
	}
	r := new(fugadv1.FugacityCoefficientsResponse)
	return hitMessage(r, raw, hit, func(rep *fugadv1.SolverReport) { r.Report = rep }), nil
}

// fugacity is the translation of FugacityCoefficients onto the eos kernel.
func (s *Server) fugacity(cf *compiledFluid, req *fugadv1.FugacityCoefficientsRequest, x []float64, root eos.RootChoice) (*fugadv1.FugacityCoefficientsResponse, error) {
	var want eos.Want
	if req.GetTemperatureDerivatives() {
		want |= eos.WantT
	}
	if req.GetPressureDerivatives() {
		want |= eos.WantP
	}
	if req.GetCompositionDerivatives() {
		want |= eos.WantN
	}
	sc := cf.getScratch()
	defer cf.putScratch(sc)
	start := time.Now()
	err := cf.mixture.Fugacity(sc.ws, req.GetTemperatureK(), req.GetPressurePa(), x, root, want, sc.fug)
	d := time.Since(start)
	if err != nil {
		return nil, s.solverError(err, "")
	}
	f := sc.fug
	resp := &fugadv1.FugacityCoefficientsResponse{
		LnFugacityCoefficients: append([]float64(nil), f.LnPhi...),
		CompressibilityFactor:  f.Z,
		MolarVolumeM3PerMol:    f.V,
		Root:                   rootFound(f.Branch),
		RealRootCount:          uint32(f.Roots),
	}
	if want&eos.WantT != 0 {
		resp.DLnPhiDTemperaturePerK = append([]float64(nil), f.DT...)
	}
	if want&eos.WantP != 0 {
		resp.DLnPhiDPressurePerPa = append([]float64(nil), f.DP...)
	}
	if want&eos.WantN != 0 {
		resp.DLnPhiDMolesPerMol = append([]float64(nil), f.DN...)
	}
	if err := checkOutputFinite(resp.LnFugacityCoefficients, resp.DLnPhiDTemperaturePerK, resp.DLnPhiDPressurePerPa, resp.DLnPhiDMolesPerMol, []float64{f.Z, f.V}); err != nil {
		return nil, err
	}
	rep := s.report()
	rep.Stages = []*fugadv1.StageReport{{Stage: fugadv1.SolverStage_SOLVER_STAGE_FUGACITY, Converged: true}}
	rep.LnPhiEvaluations = 1
	rep.Converged = true
	resp.Report = rep
	s.metrics.observeSolve("fugacity", d, rep, 0)
	return resp, nil
}

// checkOutputFinite guards the rule that NaN and ±Inf never leave the
// server: a non-finite result from a validated input is a defect.
func checkOutputFinite(vals ...[]float64) error {
	for _, vs := range vals {
		for _, x := range vs {
			if !finite(x) {
				return errInternal("the solver produced a non-finite number")
			}
		}
	}
	return nil
}

// solverError maps an error of a thermo package to a status. Input errors
// that validation did not catch are INVALID_ARGUMENT against prefix;
// non-convergence is ABORTED/NOT_CONVERGED; context ends keep their codes.
func (s *Server) solverError(err error, prefix string) error {
	var ie *eos.InputError
	var ce *eos.ConvergenceError
	switch {
	case errors.As(err, &ie):
		var v violations
		v.add(fieldPath(prefix, eosFieldPath(ie.Field)), "%s (value %g)", ie.Reason, ie.Value)
		return v.err()
	case errors.As(err, &ce):
		s.metrics.nonConverged.WithLabelValues(ReasonNotConverged, "other").Inc()
		rep := s.report()
		rep.FinalResidual = ce.Residual
		return notConverged(ce.What, ce.Iterations, ce.Residual, &fugadv1.NotConvergedDetail{Residual: ce.Residual, Report: rep})
	case errors.Is(err, context.DeadlineExceeded), errors.Is(err, context.Canceled):
		return ctxErr(err)
	}
	return errInternal("solver failed: " + err.Error())
}
