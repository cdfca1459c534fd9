package render

import (
	"math"
	"strconv"
)

// Legend draws scale s over range r as a bar w cells wide at (x, y), with
// tick labels in ADC counts on the row below and, when mevPerADC > 0 (a
// calibration), the same ticks in MeV on the row after. Labels use the
// terminal's default colours. It returns the rows drawn.
func Legend(c *Canvas, x, y, w int, s Scale, r Range, t Tier, mevPerADC float64) int {
	if w < 2 {
		return 0
	}
	drawBar(c, x, y, w, s, t)
	ticks := legendTicks(r, w)
	rows := 1
	rows += labelRow(c, x, y+rows, w, r, ticks, 1, "ADC")
	if mevPerADC > 0 && !math.IsInf(mevPerADC, 0) {
		rows += labelRow(c, x, y+rows, w, r, ticks, mevPerADC, "MeV")
	}
	return rows
}

// drawBar paints the ramp itself: colour cells in the colour tiers, the
// density ramp otherwise (braille shows one dot pattern per cell: on or
// off is all it can say).
func drawBar(c *Canvas, x, y, w int, s Scale, t Tier) {
	for i := range w {
		f := float64(i) / float64(w-1)
		switch {
		case t.HasColor():
			c.Set(x+i, y, Cell{Rune: ' ', BG: s.Swatch(f)})
		case t == TierBraille:
			ch := rune(' ')
			if i > 0 {
				ch = '⣿'
			}
			c.Set(x+i, y, Cell{Rune: ch})
		default:
			n := len(monoRamp) - 1
			c.Set(x+i, y, Cell{Rune: rune(monoRamp[int(math.Round(f*float64(n)))])})
		}
	}
}

// legendTicks returns charge values for tick marks: round numbers spaced
// so that their labels fit, always including Lo.
func legendTicks(r Range, w int) []float64 {
	if !(r.Hi > r.Lo) {
		return []float64{r.Lo}
	}
	n := max(1, w/8) // a label needs about 8 cells
	if r.Log {
		// Round 1-2-5 values, which fall about evenly on a log axis.
		ticks := []float64{r.Lo}
		for d := 1.0; d <= r.Hi; d *= 10 {
			for _, m := range []float64{1, 2, 5} {
				if v := m * d; v > r.Lo && v <= r.Hi {
					ticks = append(ticks, v)
				}
			}
		}
		return ticks
	}
	step := niceStep((r.Hi - r.Lo) / float64(n))
	ticks := []float64{r.Lo}
	for v := math.Ceil(r.Lo/step) * step; v <= r.Hi+step*1e-9; v += step {
		if v > r.Lo+step*1e-9 {
			ticks = append(ticks, v)
		}
	}
	return ticks
}

// niceStep rounds a step up to 1, 2 or 5 times a power of ten.
func niceStep(raw float64) float64 {
	if !(raw > 0) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= raw {
			return m * p
		}
	}
	return 10 * p
}

// labelRow writes tick labels (charge × factor) under their positions on
// the bar, skipping any that would touch the previous one or the unit,
// which goes at the right end. It returns 1.
func labelRow(c *Canvas, x, y, w int, r Range, ticks []float64, factor float64, unit string) int {
	limit := x + w - len(unit) - 1 // labels end before the unit
	next := x                      // first free column
	for _, v := range ticks {
		col := x + int(math.Round(r.Frac(v)*float64(w-1)))
		label := formatCharge(v * factor)
		start := max(col-len(label)/2, x)
		if start < next || start+len(label) > limit {
			continue
		}
		next = c.Text(start, y, label, nil, nil, 0) + 1
	}
	if len(unit) <= w {
		c.Text(x+w-len(unit), y, unit, nil, nil, AttrBold)
	}
	return 1
}

// formatCharge writes a value with at most three significant digits.
func formatCharge(v float64) string {
	if math.Abs(v) >= 1e4 {
		return strconv.FormatFloat(v/1e3, 'g', 3, 64) + "k"
	}
	return strconv.FormatFloat(v, 'g', 3, 64)
}
