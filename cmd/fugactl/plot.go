package main

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Plot size: a figure that fits an A4 page with margins.
const (
	plotWidth  = 18 * vg.Centimeter
	plotHeight = 13 * vg.Centimeter
)

// operatingPoint is a state drawn on the envelope (--point).
type operatingPoint struct {
	temperatureK, pressurePa float64
	label                    string
}

// parsePoint reads "40C,70bar" or "40C,70bar,inlet separator".
func parsePoint(s string) (operatingPoint, error) {
	parts := strings.SplitN(s, ",", 3)
	if len(parts) < 2 {
		return operatingPoint{}, fmt.Errorf("--point %q: want TEMPERATURE,PRESSURE[,LABEL], e.g. 40C,70bar", s)
	}
	t, err := parseQuantity(temperatureQ, parts[0])
	if err != nil {
		return operatingPoint{}, fmt.Errorf("--point %q: %w", s, err)
	}
	p, err := parseQuantity(pressureQ, parts[1])
	if err != nil {
		return operatingPoint{}, fmt.Errorf("--point %q: %w", s, err)
	}
	op := operatingPoint{temperatureK: t, pressurePa: p}
	if len(parts) == 3 {
		op.label = strings.TrimSpace(parts[2])
	}
	return op, nil
}

// plotAxes converts SI values to the plot's axis units.
type plotAxes struct {
	si bool // K and MPa instead of °C and bar
}

func (ax plotAxes) x(k float64) float64 {
	if ax.si {
		return k
	}
	return celsius(k)
}

func (ax plotAxes) y(pa float64) float64 {
	if ax.si {
		return pa / 1e6
	}
	return bar(pa)
}

func (ax plotAxes) xUnit() string {
	if ax.si {
		return "K"
	}
	return "°C"
}

func (ax plotAxes) yUnit() string {
	if ax.si {
		return "MPa"
	}
	return "bar"
}

// pointText is the label text of a marked point.
func (ax plotAxes) pointText(name string, k, pa float64) string {
	return fmt.Sprintf("%s\n%.4g %s, %.4g %s", name, ax.x(k), ax.xUnit(), ax.y(pa), ax.yUnit())
}

// Styles of the plot elements.
var (
	dewColour      = color.RGBA{R: 0x1f, G: 0x4e, B: 0x9c, A: 0xff} // blue
	bubbleColour   = color.RGBA{R: 0xc0, G: 0x39, B: 0x2b, A: 0xff} // red
	markerColour   = color.RGBA{A: 0xff}
	criticalColour = color.RGBA{R: 0x6a, G: 0x1b, B: 0x9a, A: 0xff} // purple
	pointColour    = color.RGBA{R: 0x1e, G: 0x84, B: 0x49, A: 0xff} // green
)

// envelopePlot draws an envelope: the dew branch as a solid line, the
// bubble branch dashed, the critical points, cricondenbar and
// cricondentherm marked and labelled, and the operating points.
func envelopePlot(resp *fugadv1.PhaseEnvelopeResponse, title string, ops []operatingPoint, ax plotAxes) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "temperature, " + ax.xUnit() + "\n(engineering estimate: not for the design of relief or pressure systems)"
	p.Y.Label.Text = "pressure, " + ax.yUnit()
	p.Add(plotter.NewGrid())
	p.Legend.Top, p.Legend.Left = true, true
	p.Legend.XOffs, p.Legend.YOffs = 4, -4

	segs := branchSegments(resp)
	legendDone := map[fugadv1.EnvelopeBranch]bool{}
	for _, sg := range segs {
		xy := make(plotter.XYs, len(sg.points))
		for i, pt := range sg.points {
			xy[i].X, xy[i].Y = ax.x(pt[0]), ax.y(pt[1])
		}
		l, err := plotter.NewLine(xy)
		if err != nil {
			return nil, fmt.Errorf("envelope line: %w", err)
		}
		l.Width = vg.Points(2)
		name := "dew branch"
		l.Color = dewColour
		if sg.branch == fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE {
			name = "bubble branch"
			l.Color = bubbleColour
			l.Dashes = []vg.Length{vg.Points(6), vg.Points(3)}
		}
		p.Add(l)
		if !legendDone[sg.branch] {
			p.Legend.Add(name, l)
			legendDone[sg.branch] = true
		}
	}

	// Label placement: the critical point's label to its left (the
	// bubble branch leaves it downwards to the left, the dew branch to the
	// right), the cricondenbar's above it, the cricondentherm's and the
	// operating points' to their right.
	type mark struct {
		name   string
		k, pa  float64
		shape  draw.GlyphDrawer
		col    color.Color
		offset vg.Point
		xAlign draw.XAlignment
		yAlign draw.YAlignment
	}
	left := vg.Point{X: -vg.Points(7), Y: vg.Points(3)}
	above := vg.Point{Y: vg.Points(8)}
	right := vg.Point{X: vg.Points(7), Y: -vg.Points(3)}
	var marks []mark
	for i, c := range resp.GetCriticalPoints() {
		name := "critical point"
		if len(resp.GetCriticalPoints()) > 1 {
			name = fmt.Sprintf("critical point %d", i+1)
		}
		marks = append(marks, mark{name, c.GetTemperatureK(), c.GetPressurePa(), draw.CircleGlyph{}, criticalColour, left, draw.XRight, draw.YBottom})
	}
	if c := resp.GetCricondenbar(); c != nil {
		marks = append(marks, mark{"cricondenbar", c.GetTemperatureK(), c.GetPressurePa(), draw.PyramidGlyph{}, markerColour, above, draw.XCenter, draw.YBottom})
	}
	if c := resp.GetCricondentherm(); c != nil {
		marks = append(marks, mark{"cricondentherm", c.GetTemperatureK(), c.GetPressurePa(), draw.BoxGlyph{}, markerColour, right, draw.XLeft, draw.YTop})
	}
	for _, op := range ops {
		name := op.label
		if name == "" {
			name = "operating point"
		}
		marks = append(marks, mark{name, op.temperatureK, op.pressurePa, thickCross{}, pointColour, right, draw.XLeft, draw.YTop})
	}
	legendNames := map[string]bool{}
	for _, m := range marks {
		xy := plotter.XYs{{X: ax.x(m.k), Y: ax.y(m.pa)}}
		sc, err := plotter.NewScatter(xy)
		if err != nil {
			return nil, fmt.Errorf("marker %s: %w", m.name, err)
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: m.col, Radius: vg.Points(4.5), Shape: m.shape}
		p.Add(sc)
		lg := m.name
		if _, op := m.shape.(thickCross); op {
			lg = "operating point"
		}
		if strings.HasPrefix(lg, "critical point") {
			lg = "critical point"
		}
		if !legendNames[lg] {
			p.Legend.Add(lg, sc)
			legendNames[lg] = true
		}
		lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xy, Labels: []string{ax.pointText(m.name, m.k, m.pa)}})
		if err != nil {
			return nil, fmt.Errorf("label %s: %w", m.name, err)
		}
		lb.Offset = m.offset
		for i := range lb.TextStyle {
			lb.TextStyle[i].Font.Size = vg.Points(8)
			lb.TextStyle[i].XAlign, lb.TextStyle[i].YAlign = m.xAlign, m.yAlign
		}
		p.Add(lb)
	}
	// Room for the labels right of the rightmost marks and above the
	// cricondenbar, which the automatic range leaves at the edge.
	xr, yr := p.X.Max-p.X.Min, p.Y.Max-p.Y.Min
	p.X.Max += 0.2 * xr
	p.Y.Max += 0.06 * yr
	return p, nil
}

// thickCross is an X of 2-point strokes, visible over the curves.
type thickCross struct{}

// DrawGlyph implements draw.GlyphDrawer.
func (thickCross) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	c.SetLineStyle(draw.LineStyle{Color: sty.Color, Width: vg.Points(2)})
	r := sty.Radius * 0.8
	for _, d := range []vg.Point{{X: r, Y: r}, {X: r, Y: -r}} {
		var p vg.Path
		p.Move(pt.Sub(d))
		p.Line(pt.Add(d))
		c.Stroke(p)
	}
}

// segment is a run of points on one branch, in tracing order.
type segment struct {
	branch fugadv1.EnvelopeBranch
	points [][2]float64 // (T K, P Pa)
}

// branchSegments splits the envelope points into runs of one branch. Runs
// are joined where the branch changes, through the critical point nearest
// to the change when there is one, so that the drawn curve is continuous.
func branchSegments(resp *fugadv1.PhaseEnvelopeResponse) []segment {
	var segs []segment
	for _, pt := range resp.GetPoints() {
		b := pt.GetBranch()
		switch b {
		case fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_CRITICAL:
			// Drawn as a mark; the branches are joined through it below.
			continue
		case fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_UNSPECIFIED:
			b = fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_DEW
		}
		xy := [2]float64{pt.GetTemperatureK(), pt.GetPressurePa()}
		if len(segs) == 0 || segs[len(segs)-1].branch != b {
			segs = append(segs, segment{branch: b})
		}
		segs[len(segs)-1].points = append(segs[len(segs)-1].points, xy)
	}
	for i := 0; i+1 < len(segs); i++ {
		a, b := segs[i].points[len(segs[i].points)-1], segs[i+1].points[0]
		join, ok := nearestCritical(resp, a, b)
		if ok {
			segs[i].points = append(segs[i].points, join)
			segs[i+1].points = append([][2]float64{join}, segs[i+1].points...)
		} else {
			segs[i].points = append(segs[i].points, b)
		}
	}
	return segs
}

// nearestCritical returns the critical point closest (in relative T and P)
// to the midpoint of a and b, if any.
func nearestCritical(resp *fugadv1.PhaseEnvelopeResponse, a, b [2]float64) ([2]float64, bool) {
	mid := [2]float64{(a[0] + b[0]) / 2, (a[1] + b[1]) / 2}
	best, bestD := [2]float64{}, math.Inf(1)
	for _, c := range resp.GetCriticalPoints() {
		dT := (c.GetTemperatureK() - mid[0]) / mid[0]
		dP := (c.GetPressurePa() - mid[1]) / mid[1]
		if d := dT*dT + dP*dP; d < bestD {
			best, bestD = [2]float64{c.GetTemperatureK(), c.GetPressurePa()}, d
		}
	}
	return best, !math.IsInf(bestD, 1)
}

// renderPlot renders p as "svg" or "png".
func renderPlot(p *plot.Plot, format string) ([]byte, error) {
	wt, err := p.WriterTo(plotWidth, plotHeight, format)
	if err != nil {
		return nil, fmt.Errorf("rendering %s: %w", format, err)
	}
	var b bytes.Buffer
	if _, err := wt.WriteTo(&b); err != nil {
		return nil, fmt.Errorf("rendering %s: %w", format, err)
	}
	return b.Bytes(), nil
}
