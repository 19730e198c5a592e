package server

import (
	"math"

	"google.golang.org/protobuf/encoding/protowire"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Direct encoding of flash results.
//
// A T–P flash answer is encoded once, as its solve ends (solveTPEncoded),
// and that encoding is what the result cache stores and every client
// receives. appendFlashResult writes it with protowire from the message
// tree, without the reflection-driven size and marshal passes of
// proto.Marshal, into a buffer the caller reuses. It produces exactly the
// bytes of marshalAnswer (deterministic proto.Marshal) for the fields of
// FlashResult, Phase, Properties, WarmStart, PhaseEstimate,
// StateDerivatives, SolverReport and StageReport — fields in number order; proto3 scalars omitted at
// their zero value (a negative zero is kept, as proto.Marshal keeps it);
// fields with explicit presence written when set; repeated doubles packed.
// It does not model unknown fields, which a tree the server builds
// (wireTP.fill) never has, nor proto.Marshal's UTF-8 check of strings, so
// it is used only when the server's version strings are valid UTF-8
// (Server.directEncoding). TestAppendFlashResultMatchesMarshal holds it
// to marshalAnswer's bytes.

// Field numbers (api/fugad/v1/flash.proto and solver.proto).
const (
	frTemperature, frPressure, frPhases, frVapourFraction, frOverall, frKValues, frWarmStart, frReport protowire.Number = 1, 2, 3, 4, 5, 6, 7, 8

	phLabel, phAmount, phMoleFractions, phLnPhi, phProperties protowire.Number = 1, 2, 3, 4, 5

	wsKValues, wsPhases, wsTemperature, wsPressure, wsLnKDT, wsLnKDP, wsEnthalpy, wsEntropy, wsDerivatives protowire.Number = 1, 2, 3, 4, 5, 6, 7, 8, 9

	sdHT, sdHP, sdVT, sdVP protowire.Number = 1, 2, 3, 4

	peLabel, peAmount, peMoleFractions protowire.Number = 1, 2, 3

	srStages, srInitialEstimate, srLnPhiEvaluations, srFinalResidual, srMinTPD, srStabilityPhases, srConverged, srFromCache, srDataVersion, srModelVersion, srQuantization protowire.Number = 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11

	stStage, stIterations, stConverged protowire.Number = 1, 2, 3
)

// The sizes of a tag (all field numbers here are below 16) and of a
// fixed64 value.
const (
	tagLen   = 1
	fixedLen = 8
)

// isZero reports whether a proto3 double is omitted: +0 only.
func isZero(x float64) bool { return math.Float64bits(x) == 0 }

func sizeDouble(x float64) int {
	if isZero(x) {
		return 0
	}
	return tagLen + fixedLen
}

func appendDouble(b []byte, n protowire.Number, x float64) []byte {
	if isZero(x) {
		return b
	}
	b = protowire.AppendTag(b, n, protowire.Fixed64Type)
	return protowire.AppendFixed64(b, math.Float64bits(x))
}

func sizeOptDouble(x *float64) int {
	if x == nil {
		return 0
	}
	return tagLen + fixedLen
}

func appendOptDouble(b []byte, n protowire.Number, x *float64) []byte {
	if x == nil {
		return b
	}
	b = protowire.AppendTag(b, n, protowire.Fixed64Type)
	return protowire.AppendFixed64(b, math.Float64bits(*x))
}

func sizeDoubles(xs []float64) int {
	if len(xs) == 0 {
		return 0
	}
	return tagLen + protowire.SizeBytes(fixedLen*len(xs))
}

func appendDoubles(b []byte, n protowire.Number, xs []float64) []byte {
	if len(xs) == 0 {
		return b
	}
	b = protowire.AppendTag(b, n, protowire.BytesType)
	b = protowire.AppendVarint(b, uint64(fixedLen*len(xs)))
	for _, x := range xs {
		b = protowire.AppendFixed64(b, math.Float64bits(x))
	}
	return b
}

// varint-encoded scalars: enums (as int64, as proto.Marshal encodes
// them), unsigned integers and bools.

func sizeVarint(v uint64) int {
	if v == 0 {
		return 0
	}
	return tagLen + protowire.SizeVarint(v)
}

func appendVarint(b []byte, n protowire.Number, v uint64) []byte {
	if v == 0 {
		return b
	}
	b = protowire.AppendTag(b, n, protowire.VarintType)
	return protowire.AppendVarint(b, v)
}

func enumValue(e int32) uint64 { return uint64(int64(e)) }

func boolValue(x bool) uint64 {
	if x {
		return 1
	}
	return 0
}

func sizeString(s string) int {
	if s == "" {
		return 0
	}
	return tagLen + protowire.SizeBytes(len(s))
}

func appendString(b []byte, n protowire.Number, s string) []byte {
	if s == "" {
		return b
	}
	b = protowire.AppendTag(b, n, protowire.BytesType)
	return protowire.AppendString(b, s)
}

// sizeSub is the size of a present sub-message field of content size n.
func sizeSub(n int) int { return tagLen + protowire.SizeBytes(n) }

func appendSubHeader(b []byte, n protowire.Number, size int) []byte {
	b = protowire.AppendTag(b, n, protowire.BytesType)
	return protowire.AppendVarint(b, uint64(size))
}

func sizeProperties(p *fugadv1.Properties) int {
	return sizeDouble(p.CompressibilityFactor) + sizeDouble(p.MolarVolumeM3PerMol) + sizeDouble(p.MolarDensityMolPerM3) +
		sizeDouble(p.MassDensityKgPerM3) + sizeDouble(p.MolarMassKgPerMol) + sizeDouble(p.MolarEnthalpyJPerMol) +
		sizeDouble(p.MolarEntropyJPerMolK) + sizeDouble(p.MolarGibbsEnergyJPerMol) + sizeDouble(p.MolarInternalEnergyJPerMol) +
		sizeOptDouble(p.MolarIsobaricHeatCapacityJPerMolK) + sizeOptDouble(p.MolarIsochoricHeatCapacityJPerMolK) +
		sizeOptDouble(p.SpeedOfSoundMPerS) + sizeOptDouble(p.JouleThomsonCoefficientKPerPa) + sizeOptDouble(p.IsothermalCompressibilityPerPa)
}

func appendProperties(b []byte, p *fugadv1.Properties) []byte {
	b = appendDouble(b, 1, p.CompressibilityFactor)
	b = appendDouble(b, 2, p.MolarVolumeM3PerMol)
	b = appendDouble(b, 3, p.MolarDensityMolPerM3)
	b = appendDouble(b, 4, p.MassDensityKgPerM3)
	b = appendDouble(b, 5, p.MolarMassKgPerMol)
	b = appendDouble(b, 6, p.MolarEnthalpyJPerMol)
	b = appendDouble(b, 7, p.MolarEntropyJPerMolK)
	b = appendDouble(b, 8, p.MolarGibbsEnergyJPerMol)
	b = appendDouble(b, 9, p.MolarInternalEnergyJPerMol)
	b = appendOptDouble(b, 10, p.MolarIsobaricHeatCapacityJPerMolK)
	b = appendOptDouble(b, 11, p.MolarIsochoricHeatCapacityJPerMolK)
	b = appendOptDouble(b, 12, p.SpeedOfSoundMPerS)
	b = appendOptDouble(b, 13, p.JouleThomsonCoefficientKPerPa)
	return appendOptDouble(b, 14, p.IsothermalCompressibilityPerPa)
}

func sizePhase(p *fugadv1.Phase) int {
	n := sizeVarint(enumValue(int32(p.Label))) + sizeDouble(p.Amount) + sizeDoubles(p.MoleFractions) + sizeDoubles(p.LnFugacityCoefficients)
	if p.Properties != nil {
		n += sizeSub(sizeProperties(p.Properties))
	}
	return n
}

func appendPhase(b []byte, p *fugadv1.Phase) []byte {
	b = appendVarint(b, phLabel, enumValue(int32(p.Label)))
	b = appendDouble(b, phAmount, p.Amount)
	b = appendDoubles(b, phMoleFractions, p.MoleFractions)
	b = appendDoubles(b, phLnPhi, p.LnFugacityCoefficients)
	if p.Properties != nil {
		b = appendSubHeader(b, phProperties, sizeProperties(p.Properties))
		b = appendProperties(b, p.Properties)
	}
	return b
}

func sizePhaseEstimate(e *fugadv1.PhaseEstimate) int {
	return sizeVarint(enumValue(int32(e.Label))) + sizeDouble(e.Amount) + sizeDoubles(e.MoleFractions)
}

func appendPhaseEstimate(b []byte, e *fugadv1.PhaseEstimate) []byte {
	b = appendVarint(b, peLabel, enumValue(int32(e.Label)))
	b = appendDouble(b, peAmount, e.Amount)
	return appendDoubles(b, peMoleFractions, e.MoleFractions)
}

func sizeWarmStart(w *fugadv1.WarmStart) int {
	n := sizeDoubles(w.KValues) + sizeOptDouble(w.TemperatureK) + sizeOptDouble(w.PressurePa) +
		sizeDoubles(w.LnKTemperatureSensitivityPerK) + sizeDoubles(w.LnKPressureSensitivityPerPa) +
		sizeOptDouble(w.MolarEnthalpyJPerMol) + sizeOptDouble(w.MolarEntropyJPerMolK)
	for _, e := range w.Phases {
		n += sizeSub(sizePhaseEstimate(e))
	}
	if d := w.StateDerivatives; d != nil {
		n += sizeSub(sizeStateDerivatives(d))
	}
	return n
}

func sizeStateDerivatives(d *fugadv1.StateDerivatives) int {
	return sizeDouble(d.EnthalpyTemperatureDerivativeJPerMolK) + sizeDouble(d.EnthalpyPressureDerivativeJPerMolPa) +
		sizeDouble(d.VolumeTemperatureDerivativeM3PerMolK) + sizeDouble(d.VolumePressureDerivativeM3PerMolPa)
}

func appendStateDerivatives(b []byte, d *fugadv1.StateDerivatives) []byte {
	b = appendDouble(b, sdHT, d.EnthalpyTemperatureDerivativeJPerMolK)
	b = appendDouble(b, sdHP, d.EnthalpyPressureDerivativeJPerMolPa)
	b = appendDouble(b, sdVT, d.VolumeTemperatureDerivativeM3PerMolK)
	return appendDouble(b, sdVP, d.VolumePressureDerivativeM3PerMolPa)
}

func appendWarmStart(b []byte, w *fugadv1.WarmStart) []byte {
	b = appendDoubles(b, wsKValues, w.KValues)
	for _, e := range w.Phases {
		b = appendSubHeader(b, wsPhases, sizePhaseEstimate(e))
		b = appendPhaseEstimate(b, e)
	}
	b = appendOptDouble(b, wsTemperature, w.TemperatureK)
	b = appendOptDouble(b, wsPressure, w.PressurePa)
	b = appendDoubles(b, wsLnKDT, w.LnKTemperatureSensitivityPerK)
	b = appendDoubles(b, wsLnKDP, w.LnKPressureSensitivityPerPa)
	b = appendOptDouble(b, wsEnthalpy, w.MolarEnthalpyJPerMol)
	b = appendOptDouble(b, wsEntropy, w.MolarEntropyJPerMolK)
	if d := w.StateDerivatives; d != nil {
		b = appendSubHeader(b, wsDerivatives, sizeStateDerivatives(d))
		b = appendStateDerivatives(b, d)
	}
	return b
}

func sizeStage(s *fugadv1.StageReport) int {
	return sizeVarint(enumValue(int32(s.Stage))) + sizeVarint(uint64(s.Iterations)) + sizeVarint(boolValue(s.Converged))
}

func appendStage(b []byte, s *fugadv1.StageReport) []byte {
	b = appendVarint(b, stStage, enumValue(int32(s.Stage)))
	b = appendVarint(b, stIterations, uint64(s.Iterations))
	return appendVarint(b, stConverged, boolValue(s.Converged))
}

func sizeReport(r *fugadv1.SolverReport) int {
	n := sizeVarint(enumValue(int32(r.InitialEstimate))) + sizeVarint(r.LnPhiEvaluations) + sizeDouble(r.FinalResidual) +
		sizeOptDouble(r.MinimumTangentPlaneDistance) + sizeVarint(uint64(r.StabilityPhaseCount)) + sizeVarint(boolValue(r.Converged)) +
		sizeVarint(boolValue(r.FromCache)) + sizeString(r.DataVersion) + sizeString(r.ModelVersion) + sizeDouble(r.InputQuantizationRelativeTolerance)
	for _, s := range r.Stages {
		n += sizeSub(sizeStage(s))
	}
	return n
}

func appendReport(b []byte, r *fugadv1.SolverReport) []byte {
	for _, s := range r.Stages {
		b = appendSubHeader(b, srStages, sizeStage(s))
		b = appendStage(b, s)
	}
	b = appendVarint(b, srInitialEstimate, enumValue(int32(r.InitialEstimate)))
	b = appendVarint(b, srLnPhiEvaluations, r.LnPhiEvaluations)
	b = appendDouble(b, srFinalResidual, r.FinalResidual)
	b = appendOptDouble(b, srMinTPD, r.MinimumTangentPlaneDistance)
	b = appendVarint(b, srStabilityPhases, uint64(r.StabilityPhaseCount))
	b = appendVarint(b, srConverged, boolValue(r.Converged))
	b = appendVarint(b, srFromCache, boolValue(r.FromCache))
	b = appendString(b, srDataVersion, r.DataVersion)
	b = appendString(b, srModelVersion, r.ModelVersion)
	return appendDouble(b, srQuantization, r.InputQuantizationRelativeTolerance)
}

// appendFlashResult appends the encoding of r (see the comment at the top
// of this file) to b. r's tree must be one the server built (wireTP.fill):
// no unknown fields, no nil elements in its repeated fields.
func appendFlashResult(b []byte, r *fugadv1.FlashResult) []byte {
	b = appendDouble(b, frTemperature, r.TemperatureK)
	b = appendDouble(b, frPressure, r.PressurePa)
	for _, p := range r.Phases {
		b = appendSubHeader(b, frPhases, sizePhase(p))
		b = appendPhase(b, p)
	}
	b = appendDouble(b, frVapourFraction, r.VapourFraction)
	if r.Overall != nil {
		b = appendSubHeader(b, frOverall, sizeProperties(r.Overall))
		b = appendProperties(b, r.Overall)
	}
	b = appendDoubles(b, frKValues, r.KValues)
	if r.WarmStart != nil {
		b = appendSubHeader(b, frWarmStart, sizeWarmStart(r.WarmStart))
		b = appendWarmStart(b, r.WarmStart)
	}
	if r.Report != nil {
		b = appendSubHeader(b, frReport, sizeReport(r.Report))
		b = appendReport(b, r.Report)
	}
	return b
}
