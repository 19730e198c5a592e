package main

import (
	"bytes"
	"encoding/xml"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// fixtureEnvelope is a TEST FIXTURE, not a computed envelope: a curve
// drawn through invented anchor points shaped like the envelope of a lean
// natural gas (dew branch from 1 bar over a cricondentherm near 2 °C and a
// cricondenbar near 88 bar to a critical point at −65 °C, 70 bar; bubble
// branch down to 1 bar), used only to test plotting and printing.
func fixtureEnvelope() *fugadv1.PhaseEnvelopeResponse {
	resp := &fugadv1.PhaseEnvelopeResponse{Complete: true, Report: &fugadv1.SolverReport{Converged: true, LnPhiEvaluations: 812}}
	dew := [][2]float64{{-25, 1}, {-5, 10}, {2, 30}, {0, 50}, {-15, 75}, {-35, 88}, {-50, 85}, {-60, 76}}
	bubble := [][2]float64{{-70, 64}, {-85, 45}, {-105, 25}, {-125, 10}, {-150, 1}}
	add := func(anchors [][2]float64, b fugadv1.EnvelopeBranch) {
		for i := 0; i+1 < len(anchors); i++ {
			for k := range 4 {
				s := float64(k) / 4
				tC := anchors[i][0] + s*(anchors[i+1][0]-anchors[i][0])
				pBar := anchors[i][1] + s*(anchors[i+1][1]-anchors[i][1])
				resp.Points = append(resp.Points, &fugadv1.EnvelopePoint{TemperatureK: tC + 273.15, PressurePa: pBar * 1e5, Branch: b})
			}
		}
		last := anchors[len(anchors)-1]
		resp.Points = append(resp.Points, &fugadv1.EnvelopePoint{TemperatureK: last[0] + 273.15, PressurePa: last[1] * 1e5, Branch: b})
	}
	add(dew, fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_DEW)
	add(bubble, fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE)
	resp.CriticalPoints = []*fugadv1.CriticalPoint{{TemperatureK: 208.15, PressurePa: 70e5, MolarVolumeM3PerMol: 1.1e-4}}
	var bar, therm *fugadv1.EnvelopePoint
	for _, p := range resp.Points {
		if bar == nil || p.GetPressurePa() > bar.GetPressurePa() {
			bar = p
		}
		if therm == nil || p.GetTemperatureK() > therm.GetTemperatureK() {
			therm = p
		}
	}
	resp.Cricondenbar, resp.Cricondentherm = bar, therm
	return resp
}

// svgTexts parses an SVG document as XML and returns its root element
// name and the character data of all its elements.
func svgTexts(t *testing.T, b []byte) (string, string) {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	root := ""
	var text strings.Builder
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG is not well-formed XML: %v", err)
		}
		switch v := tok.(type) {
		case xml.StartElement:
			if root == "" {
				root = v.Name.Local
			}
		case xml.CharData:
			text.Write(v)
			text.WriteByte(' ')
		}
	}
	return root, text.String()
}

// countColour counts pixels within tol (per channel) of c.
func countColour(img image.Image, c color.RGBA, tol int) int {
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			d := func(a uint32, b uint8) int { return abs(int(a>>8) - int(b)) }
			if d(r, c.R) <= tol && d(g, c.G) <= tol && d(bl, c.B) <= tol {
				n++
			}
		}
	}
	return n
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// TestEnvelopePlot renders the fixture as SVG and PNG: the SVG must parse
// as XML with an <svg> root and carry the labels of the marked points, the
// axes and the title; the PNG must decode at the figure size and contain
// pixels of the dew, bubble and operating-point colours.
func TestEnvelopePlot(t *testing.T) {
	op, err := parsePoint("40C,70bar,inlet separator")
	if err != nil {
		t.Fatal(err)
	}
	p, err := envelopePlot(fixtureEnvelope(), "Phase envelope, PR78: methane 87%, ethane 5.2%", []operatingPoint{op}, plotAxes{})
	if err != nil {
		t.Fatal(err)
	}
	svg, err := renderPlot(p, "svg")
	if err != nil {
		t.Fatal(err)
	}
	root, text := svgTexts(t, svg)
	if root != "svg" {
		t.Errorf("root element %q, want svg", root)
	}
	for _, s := range []string{"critical point", "cricondenbar", "cricondentherm", "inlet separator", "dew branch", "bubble branch",
		"operating point", "temperature, °C", "pressure, bar", "Phase envelope, PR78", "-65 °C, 70 bar", "40 °C, 70 bar"} {
		if !strings.Contains(text, s) {
			t.Errorf("SVG text lacks %q", s)
		}
	}
	pngBytes, err := renderPlot(p, "png")
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(pngBytes))
	if err != nil {
		t.Fatalf("PNG does not decode: %v", err)
	}
	// vgimg renders at 96 dpi by default.
	wantW, wantH := int(math.Round(plotWidth.Dots(96))), int(math.Round(plotHeight.Dots(96)))
	if b := img.Bounds(); abs(b.Dx()-wantW) > 1 || abs(b.Dy()-wantH) > 1 {
		t.Errorf("PNG %v, want about %d×%d", b, wantW, wantH)
	}
	if os.Getenv("FUGACTL_KEEP_PLOT") != "" {
		_ = os.WriteFile(os.Getenv("FUGACTL_KEEP_PLOT"), pngBytes, 0o644)
	}
	for name, c := range map[string]color.RGBA{"dew line": dewColour, "bubble line": bubbleColour, "operating point": pointColour, "critical point": criticalColour} {
		if n := countColour(img, c, 24); n < 20 {
			t.Errorf("%s colour: %d pixels in the PNG", name, n)
		}
	}
	// The SI axes variant labels K and MPa.
	p, err = envelopePlot(fixtureEnvelope(), "t", nil, plotAxes{si: true})
	if err != nil {
		t.Fatal(err)
	}
	svg, _ = renderPlot(p, "svg")
	if _, text := svgTexts(t, svg); !strings.Contains(text, "temperature, K") || !strings.Contains(text, "pressure, MPa") || !strings.Contains(text, "208.2 K, 7 MPa") {
		t.Errorf("SI axes missing:\n%s", text)
	}
	if os.Getenv("FUGACTL_KEEP_PLOT") != "" {
		_ = os.WriteFile(os.Getenv("FUGACTL_KEEP_PLOT"), pngBytes, 0o644)
	}
}

// TestBranchSegmentsJoinAtCritical checks that the dew and bubble lines
// meet at the critical point.
func TestBranchSegmentsJoinAtCritical(t *testing.T) {
	env := fixtureEnvelope()
	segs := branchSegments(env)
	if len(segs) != 2 || segs[0].branch != fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_DEW || segs[1].branch != fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE {
		t.Fatalf("segments %+v", segs)
	}
	c := [2]float64{env.GetCriticalPoints()[0].GetTemperatureK(), env.GetCriticalPoints()[0].GetPressurePa()}
	if segs[0].points[len(segs[0].points)-1] != c || segs[1].points[0] != c {
		t.Errorf("branches do not meet at the critical point %v", c)
	}
	if len(segs[0].points) != 30 || len(segs[1].points) != 18 {
		t.Errorf("segment sizes %d, %d", len(segs[0].points), len(segs[1].points))
	}
}

// TestEnvelopeCommand runs "fugactl envelope" against a fake server that
// answers the fixture: the request carries SI pressures, the files are
// written, and the table names the critical point, cricondenbar and
// cricondentherm.
func TestEnvelopeCommand(t *testing.T) {
	rec := &recorder{envelopeResp: fixtureEnvelope()}
	dir := t.TempDir()
	prefix := filepath.Join(dir, "kr-sales")
	r := runCLI(t, serveRecorder(t, rec), "", "envelope", "--model", "PR78", "--fluid", threeFeed, "--start-pressure", "2bar",
		"--max-pressure", "30MPa", "--max-points", "500", "--plot", prefix, "--point", "40C,70bar,inlet separator", "--point", "5C,55bar", "--list")
	if r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	req := rec.envelope[0]
	if req.GetStartPressurePa() != 2e5 || req.GetMaximumPressurePa() != 30e6 || req.GetMaxPoints() != 500 || !sameFractions(req.GetMoleFractions(), threeX) {
		t.Errorf("request %v", req)
	}
	for _, s := range []string{"46 points (29 dew, 17 bubble), complete trace", "critical point", "208.15", "-65.00", "cricondenbar", "cricondentherm",
		"inlet separator (given)", "operating point (given)", "plot written to " + prefix + ".svg", "plot written to " + prefix + ".png", "bubble", cautionShort} {
		if !strings.Contains(r.stdout, s) {
			t.Errorf("output lacks %q:\n%s", s, r.stdout)
		}
	}
	for _, f := range []string{prefix + ".svg", prefix + ".png"} {
		if st, err := os.Stat(f); err != nil || st.Size() < 1000 {
			t.Errorf("%s: %v", f, err)
		}
	}
	b, _ := os.ReadFile(prefix + ".svg")
	if root, _ := svgTexts(t, b); root != "svg" {
		t.Errorf("written SVG root %q", root)
	}
	// UNIMPLEMENTED answer: readable error, no files.
	rec2 := &recorder{err: unimplemented(t)}
	r = runCLI(t, serveRecorder(t, rec2), "", "envelope", "--model", "PR78", "--fluid", threeFeed, "--svg", filepath.Join(dir, "none.svg"))
	if r.code != exitFailed || !strings.Contains(r.stderr, "UNIMPLEMENTED") {
		t.Errorf("exit %d: %s", r.code, r.stderr)
	}
	if _, err := os.Stat(filepath.Join(dir, "none.svg")); err == nil {
		t.Error("plot written for a failed call")
	}
	r = runCLI(t, serveRecorder(t, rec2), "", "envelope", "--model", "PR78", "--fluid", threeFeed, "--point", "40C")
	if r.code != exitUsage || !strings.Contains(r.stderr, "TEMPERATURE,PRESSURE") {
		t.Errorf("bad point: exit %d: %s", r.code, r.stderr)
	}
}
