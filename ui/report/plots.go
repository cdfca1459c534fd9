package report

import (
	"bytes"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"strconv"

	"github.com/lucasb-eyer/go-colorful"
	xfont "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Colours of the report, designed for it. The heat-map ramp runs in OKLab
// from pale straw to deep ink blue with lightness falling strictly, so it
// reads by lightness alone (colour-blind safe and fine in greyscale print).
// Series are told apart by marker shape and line dash as well as colour.
var (
	inkBlue  = color.RGBA{0x1f, 0x3b, 0x73, 0xff}
	rustRed  = color.RGBA{0xa8, 0x4a, 0x1c, 0xff}
	mossGrey = color.RGBA{0x55, 0x5f, 0x52, 0xff}
	bandBlue = color.NRGBA{0x1f, 0x3b, 0x73, 0x38}
	bandRust = color.NRGBA{0xa8, 0x4a, 0x1c, 0x38}
)

// ramp is the heat-map colour at f ∈ [0, 1], and whether text on it should
// be light.
func ramp(f float64) (color.Color, bool) {
	f = math.Max(0, math.Min(1, f))
	if math.IsNaN(f) {
		f = 0
	}
	// Control points in OKLCh: lightness 0.97 → 0.28, chroma rising, hue
	// turning from straw (95°) through sea green (185°) to ink blue (265°).
	l := 0.97 - 0.69*f
	c := 0.03 + 0.10*f
	h := (95 + 170*f) * math.Pi / 180
	col := colorful.OkLab(l, c*math.Cos(h), c*math.Sin(h)).Clamped()
	r, g, b := col.RGB255()
	return color.RGBA{r, g, b, 0xff}, l < 0.6
}

type rampPalette struct{ n int }

func (p rampPalette) Colors() []color.Color {
	out := make([]color.Color, p.n)
	for i := range out {
		out[i], _ = ramp(float64(i) / float64(p.n-1))
	}
	return out
}

// Matrix is a table of numbers to draw as a heat map: Cells[row][col].
type Matrix struct {
	Title            string
	RowLabel         string
	ColLabel         string
	Rows, Cols       []string
	Cells            [][]float64
	Percent          bool // cells are fractions: print as percentages
	RowNormalisedMax bool // colour by the row's share, not the count
}

type grid struct {
	m    [][]float64
	rows int
}

func (g grid) Dims() (int, int)   { return len(g.m[0]), g.rows }
func (g grid) Z(c, r int) float64 { return g.m[g.rows-1-r][c] }
func (g grid) X(c int) float64    { return float64(c) }
func (g grid) Y(r int) float64    { return float64(r) }

// heatMap draws a matrix with the value printed in every cell.
func heatMap(m Matrix) (template.HTML, error) {
	if len(m.Rows) == 0 || len(m.Cols) == 0 {
		return "", nil
	}
	colour := make([][]float64, len(m.Cells)) // 0–1 per cell
	for i, row := range m.Cells {
		colour[i] = make([]float64, len(row))
		var top float64
		for _, v := range row {
			if !math.IsNaN(v) {
				top = math.Max(top, v)
			}
		}
		if !m.RowNormalisedMax {
			top = 0
			for _, r := range m.Cells {
				for _, v := range r {
					if !math.IsNaN(v) {
						top = math.Max(top, v)
					}
				}
			}
		}
		for j, v := range row {
			if top > 0 && !math.IsNaN(v) {
				colour[i][j] = v / top
			}
		}
	}
	p := plot.New()
	p.Title.Text = m.Title
	p.X.Label.Text = m.ColLabel
	p.Y.Label.Text = m.RowLabel
	hm := plotter.NewHeatMap(grid{colour, len(m.Rows)}, rampPalette{64})
	hm.Min, hm.Max = 0, 1
	p.Add(hm)
	var xys plotter.XYLabels
	var styles []text.Style
	for i, row := range m.Cells {
		for j, v := range row {
			xys.XYs = append(xys.XYs, plotter.XY{X: float64(j), Y: float64(len(m.Rows) - 1 - i)})
			xys.Labels = append(xys.Labels, cellText(v, m.Percent))
			_, light := ramp(colour[i][j])
			f := font.From(plot.DefaultFont, vg.Points(10))
			f.Variant = "Sans"
			st := text.Style{Color: color.Black, XAlign: draw.XCenter, YAlign: draw.YCenter,
				Font: f, Handler: plot.DefaultTextHandler}
			if light {
				st.Color = color.White
			}
			styles = append(styles, st)
		}
	}
	labels, err := plotter.NewLabels(xys)
	if err != nil {
		return "", fmt.Errorf("heat map %s: %w", m.Title, err)
	}
	labels.TextStyle = styles
	p.Add(labels)
	p.NominalX(m.Cols...)
	rev := make([]string, len(m.Rows))
	for i, r := range m.Rows {
		rev[len(m.Rows)-1-i] = r
	}
	p.NominalY(rev...)
	p.X.Tick.Label.Rotation = math.Pi / 6
	p.X.Tick.Label.XAlign, p.X.Tick.Label.YAlign = draw.XRight, draw.YCenter
	w := vg.Length(170 + 58*len(m.Cols))
	h := vg.Length(120 + 46*len(m.Rows))
	return svg(p, max(w, 300), h)
}

func cellText(v float64, percent bool) string {
	switch {
	case math.IsNaN(v):
		return "–"
	case percent:
		return strconv.FormatFloat(100*v, 'f', 0, 64) + "%"
	}
	return strconv.FormatFloat(v, 'f', -1, 64)
}

// Point is a value with an interval, drawn as a marker with error bars.
type Point struct {
	Name             string
	Value, Low, High float64
}

// intervalPlot draws named points with their intervals on a [0, 1]-ish
// axis (or the range of the data, whichever is wider).
func intervalPlot(title, ylabel string, pts []Point, ref *float64) (template.HTML, error) {
	if len(pts) == 0 {
		return "", nil
	}
	p := plot.New()
	p.Title.Text = title
	p.Y.Label.Text = ylabel
	var xys plotter.XYs
	var errs plotter.YErrors
	var undefined []string
	names := make([]string, len(pts))
	lo, hi := 0.0, 1.0
	for i, pt := range pts {
		names[i] = pt.Name
		if math.IsNaN(pt.Value) {
			undefined = append(undefined, pt.Name)
			continue
		}
		l, h := pt.Low, pt.High
		if math.IsNaN(l) || math.IsNaN(h) {
			l, h = pt.Value, pt.Value
		}
		xys = append(xys, plotter.XY{X: float64(i), Y: pt.Value})
		errs = append(errs, struct{ Low, High float64 }{pt.Value - l, h - pt.Value})
		lo, hi = math.Min(lo, l), math.Max(hi, h)
	}
	if len(xys) > 0 {
		sc, err := plotter.NewScatter(xys)
		if err != nil {
			return "", err
		}
		sc.GlyphStyle.Shape = draw.CircleGlyph{}
		sc.GlyphStyle.Color = inkBlue
		sc.GlyphStyle.Radius = vg.Points(3.5)
		eb, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{xys, errs})
		if err != nil {
			return "", err
		}
		eb.LineStyle.Color = inkBlue
		eb.LineStyle.Width = vg.Points(1.2)
		eb.CapWidth = vg.Points(8)
		p.Add(plotter.NewGrid(), eb, sc)
	}
	if ref != nil {
		l := referenceLine(*ref, len(pts))
		p.Add(l)
	}
	p.NominalX(names...)
	p.X.Tick.Label.Rotation = math.Pi / 8
	p.X.Tick.Label.XAlign, p.X.Tick.Label.YAlign = draw.XRight, draw.YCenter
	p.X.Min, p.X.Max = -0.5, float64(len(pts))-0.5
	p.Y.Min, p.Y.Max = math.Min(0, lo), math.Max(1, hi)
	if len(undefined) > 0 {
		p.Title.Text += " (undefined: " + joinShort(undefined) + ")"
	}
	return svg(p, vg.Length(max(420, 130+70*len(pts))), 300)
}

func referenceLine(y float64, n int) *plotter.Line {
	l, _ := plotter.NewLine(plotter.XYs{{X: -0.5, Y: y}, {X: float64(n) - 0.5, Y: y}})
	l.LineStyle.Color = mossGrey
	l.LineStyle.Dashes = []vg.Length{vg.Points(2), vg.Points(3)}
	return l
}

func joinShort(s []string) string {
	if len(s) > 4 {
		return fmt.Sprintf("%s, %s, … %d more", s[0], s[1], len(s)-2)
	}
	out := ""
	for i, x := range s {
		if i > 0 {
			out += ", "
		}
		out += x
	}
	return out
}

// CurvePoint is one threshold of the selection curves.
type CurvePoint struct {
	Threshold               float64
	Eff, EffLow, EffHigh    float64
	Purity, PurLow, PurHigh float64
}

// curvePlot draws efficiency (solid, circles) and purity (dashed,
// triangles) against the score threshold with their interval bands.
func curvePlot(title string, pts []CurvePoint, cut *float64) (template.HTML, error) {
	if len(pts) == 0 {
		return "", nil
	}
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "score threshold (selected: score ≥ threshold)"
	p.Y.Label.Text = "fraction"
	// Headroom above 1 keeps the legend clear of the curves.
	p.Y.Min, p.Y.Max = 0, 1.24
	p.Y.Tick.Marker = plot.ConstantTicks{{Value: 0, Label: "0"}, {Value: 0.2, Label: "0.2"}, {Value: 0.4, Label: "0.4"},
		{Value: 0.6, Label: "0.6"}, {Value: 0.8, Label: "0.8"}, {Value: 1, Label: "1"}}
	p.Add(plotter.NewGrid())
	series := []struct {
		name  string
		val   func(CurvePoint) (float64, float64, float64)
		col   color.RGBA
		band  color.NRGBA
		shape draw.GlyphDrawer
		dash  []vg.Length
	}{
		{"efficiency", func(c CurvePoint) (float64, float64, float64) { return c.Eff, c.EffLow, c.EffHigh },
			inkBlue, bandBlue, draw.CircleGlyph{}, nil},
		{"purity", func(c CurvePoint) (float64, float64, float64) { return c.Purity, c.PurLow, c.PurHigh },
			rustRed, bandRust, draw.TriangleGlyph{}, []vg.Length{vg.Points(6), vg.Points(3)}},
	}
	for _, s := range series {
		var line plotter.XYs
		var upper, lower plotter.XYs
		for _, c := range pts {
			v, lo, hi := s.val(c)
			if math.IsNaN(v) {
				continue
			}
			line = append(line, plotter.XY{X: c.Threshold, Y: v})
			upper = append(upper, plotter.XY{X: c.Threshold, Y: hi})
			lower = append([]plotter.XY{{X: c.Threshold, Y: lo}}, lower...)
		}
		if len(line) == 0 {
			continue
		}
		band, err := plotter.NewPolygon(append(upper, lower...))
		if err != nil {
			return "", err
		}
		band.Color = s.band
		band.LineStyle.Width = 0
		l, sc, err := plotter.NewLinePoints(line)
		if err != nil {
			return "", err
		}
		l.LineStyle.Color, l.LineStyle.Width, l.LineStyle.Dashes = s.col, vg.Points(1.5), s.dash
		sc.GlyphStyle.Color, sc.GlyphStyle.Shape, sc.GlyphStyle.Radius = s.col, s.shape, vg.Points(2.5)
		p.Add(band, l, sc)
		p.Legend.Add(s.name, l, sc)
	}
	if cut != nil {
		v, _ := plotter.NewLine(plotter.XYs{{X: *cut, Y: 0}, {X: *cut, Y: 1}})
		v.LineStyle.Color = mossGrey
		v.LineStyle.Dashes = []vg.Length{vg.Points(2), vg.Points(3)}
		p.Add(v)
		p.Legend.Add("operating point", v)
	}
	p.Legend.Top = true
	p.Legend.Left = false
	p.Legend.XOffs, p.Legend.YOffs = -vg.Points(6), -vg.Points(6)
	p.Legend.ThumbnailWidth = vg.Points(28)
	p.Legend.Padding = vg.Points(3)
	return svg(p, 620, 360)
}

// boxPlot draws one box per scanner of its seconds per event.
func boxPlot(title string, names []string, values [][]float64) (template.HTML, error) {
	if len(names) == 0 {
		return "", nil
	}
	p := plot.New()
	p.Title.Text = title
	p.Y.Label.Text = "seconds per event"
	p.Add(plotter.NewGrid())
	labels := make([]string, len(names))
	for i, v := range values {
		labels[i] = fmt.Sprintf("%s (n=%d)", names[i], len(v))
		if len(v) == 0 {
			continue
		}
		b, err := plotter.NewBoxPlot(vg.Points(28), float64(i), plotter.Values(v))
		if err != nil {
			return "", fmt.Errorf("time of %s: %w", names[i], err)
		}
		b.FillColor = color.RGBA{0xdc, 0xe4, 0xee, 0xff}
		b.BoxStyle.Color = inkBlue
		b.MedianStyle.Color = inkBlue
		b.MedianStyle.Width = vg.Points(2)
		b.GlyphStyle.Color = mossGrey
		p.Add(b)
	}
	p.NominalX(labels...)
	p.Y.Min = 0
	return svg(p, vg.Length(max(380, 130+90*len(names))), 300)
}

// sans sets every text of a plot in the sans-serif face of the page.
func sans(p *plot.Plot) {
	for _, st := range []*text.Style{&p.Title.TextStyle, &p.X.Label.TextStyle, &p.Y.Label.TextStyle,
		&p.X.Tick.Label, &p.Y.Tick.Label, &p.Legend.TextStyle} {
		st.Font.Variant = "Sans"
	}
	p.Title.TextStyle.Font.Size = vg.Points(13)
	p.Title.TextStyle.Font.Weight = xfont.WeightBold
	p.Title.Padding = vg.Points(6)
}

func svg(p *plot.Plot, w, h vg.Length) (template.HTML, error) {
	sans(p)
	c := vgsvg.New(w, h)
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return "", fmt.Errorf("draw %s: %w", p.Title.Text, err)
	}
	out := buf.Bytes()
	// Drop the XML declaration: the SVG is inlined in HTML.
	if i := bytes.Index(out, []byte("<svg")); i > 0 {
		out = out[i:]
	}
	return template.HTML(out), nil // gonum's SVG writer escapes all text
}
