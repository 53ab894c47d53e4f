package web

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"math"
)

// IconSizes are the icon sizes the manifest refers to (icon-N.png).
var IconSizes = []int{16, 32, 64, 80}

// Icon draws the add-in's icon as a size x size PNG: a rounded blue square
// with a pale reference band rising over age and one vermillion reading
// above it. It is drawn in code so that no binary file needs keeping.
func Icon(size int) []byte {
	const ss = 4 // supersampling per axis, for smooth edges
	n := size * ss
	blue := [3]float64{0x00, 0x72, 0xB2}
	band := [3]float64{0xCC, 0xE8, 0xF7}
	white := [3]float64{0xFF, 0xFF, 0xFF}
	red := [3]float64{0xD5, 0x5E, 0x00}
	img := image.NewNRGBA(image.Rect(0, 0, size, size))
	r := 0.18 * float64(n) // corner radius
	for y := 0; y < size; y++ {
		for x := 0; x < size; x++ {
			var acc [3]float64
			var alpha float64
			for sy := 0; sy < ss; sy++ {
				for sx := 0; sx < ss; sx++ {
					px := float64(x*ss+sx) + 0.5
					py := float64(y*ss+sy) + 0.5
					if !insideRounded(px, py, float64(n), r) {
						continue
					}
					alpha++
					c := blue
					u := px / float64(n)   // 0..1 left to right ("age")
					v := 1 - py/float64(n) // 0..1 bottom to top
					mid := 0.25 + 0.35*u*u // median curve
					half := 0.10 + 0.04*u  // half-width of the band
					if math.Abs(v-mid) < half && u > 0.12 && u < 0.88 {
						c = band
					}
					if math.Abs(v-mid) < 0.035 && u > 0.12 && u < 0.88 {
						c = white
					}
					if dx, dy := u-0.72, v-0.80; dx*dx+dy*dy < 0.011 {
						c = red
					}
					for k := range acc {
						acc[k] += c[k]
					}
				}
			}
			if alpha == 0 {
				continue
			}
			img.SetNRGBA(x, y, color.NRGBA{
				R: uint8(acc[0] / alpha), G: uint8(acc[1] / alpha), B: uint8(acc[2] / alpha),
				A: uint8(255 * alpha / (ss * ss)),
			})
		}
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		panic(err) // encoding an in-memory image cannot fail
	}
	return buf.Bytes()
}

// insideRounded reports whether (x, y) lies in the n x n square with corner
// radius r.
func insideRounded(x, y, n, r float64) bool {
	cx := math.Min(math.Max(x, r), n-r)
	cy := math.Min(math.Max(y, r), n-r)
	dx, dy := x-cx, y-cy
	return dx*dx+dy*dy <= r*r
}
