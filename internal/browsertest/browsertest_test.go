package browsertest

import (
	"image"
	"image/color"
	"math"
	"testing"
)

func TestInkAndShare(t *testing.T) {
	white := color.RGBA{255, 255, 255, 255}
	img := image.NewRGBA(image.Rect(0, 0, 10, 10))
	for y := 0; y < 10; y++ {
		for x := 0; x < 10; x++ {
			img.Set(x, y, white)
		}
	}
	for _, c := range []struct {
		name      string
		paint     int        // pixels painted in the first rows
		col       color.RGBA // with this colour
		ink, blue float64
	}{
		{"blank", 0, white, 0, 0},
		{"near white is no ink", 30, color.RGBA{250, 250, 250, 255}, 0, 0},
		{"a quarter blue", 25, color.RGBA{0x56, 0xB4, 0xE9, 255}, 0.25, 0.25},
		{"a fifth black", 20, color.RGBA{0, 0, 0, 255}, 0.20, 0},
	} {
		m := image.NewRGBA(img.Bounds())
		copy(m.Pix, img.Pix)
		for i := 0; i < c.paint; i++ {
			m.Set(i%10, i/10, c.col)
		}
		ink := Ink(m, white, 24)
		blue := Share(m, func(r, g, b uint8) bool { return int(b)-int(r) > 30 })
		if math.Abs(ink-c.ink) > 1e-12 || math.Abs(blue-c.blue) > 1e-12 {
			t.Errorf("%s: ink %v, blue %v; want %v, %v", c.name, ink, blue, c.ink, c.blue)
		}
	}
	if Ink(image.NewRGBA(image.Rect(0, 0, 0, 0)), white, 0) != 0 {
		t.Error("an empty picture has ink")
	}
}
