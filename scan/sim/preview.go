package sim

import (
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"

	"github.com/tpcscan/tpcscan/scan"
)

// WritePreviewPNG writes a quick grey-scale picture of a plane image for
// checking generated events outside the terminal: wires run left to right,
// ticks top to bottom, each picture row holding the largest sample of
// ticksPerRow ticks (4 makes pixels nearly square for 3 mm pitch and 0.8 mm
// ticks). Charge is dark on white on a logarithmic scale up to fullADC.
func WritePreviewPNG(w io.Writer, m *scan.Image, ticksPerRow int, fullADC float64) error {
	if ticksPerRow < 1 || fullADC <= 0 {
		return fmt.Errorf("preview: ticksPerRow %d and fullADC %g must be positive", ticksPerRow, fullADC)
	}
	rows := (m.Ticks + ticksPerRow - 1) / ticksPerRow
	pic := image.NewGray(image.Rect(0, 0, m.Wires, rows))
	norm := 1 / math.Log1p(fullADC)
	for wi := 0; wi < m.Wires; wi++ {
		row := m.Row(wi)
		for y := range rows {
			var v float32
			for _, s := range row[y*ticksPerRow : min(len(row), (y+1)*ticksPerRow)] {
				v = max(v, s)
			}
			f := min(1, math.Log1p(max(0, float64(v)-4))*norm) // noise below 2σ (4 ADC) stays white
			pic.SetGray(wi, y, color.Gray{Y: uint8(255 * (1 - f))})
		}
	}
	if err := png.Encode(w, pic); err != nil {
		return fmt.Errorf("preview: %w", err)
	}
	return nil
}
