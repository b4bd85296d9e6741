package synth

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"math"
)

// Logo draws the invented works' emblem: a teal ring around a drop, on a
// transparent square of size×size pixels, as PNG bytes.
func Logo(size int) []byte {
	img := image.NewNRGBA(image.Rect(0, 0, size, size))
	teal := color.NRGBA{R: 0x1f, G: 0x6f, B: 0x78, A: 0xff}
	c := float64(size) / 2
	for y := range size {
		for x := range size {
			dx, dy := float64(x)+0.5-c, float64(y)+0.5-c
			r := math.Hypot(dx, dy)
			ring := r > 0.80*c && r < 0.95*c
			// A drop: a circle with a point on top.
			cy := c + 0.12*c
			rd := math.Hypot(dx, float64(y)+0.5-cy)
			drop := rd < 0.38*c || (float64(y)+0.5 < cy && math.Abs(dx) < 0.38*c*(float64(y)+0.5-(c-0.62*c))/(cy-(c-0.62*c)))
			if ring || drop {
				img.SetNRGBA(x, y, teal)
			}
		}
	}
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		panic(err) // encoding an in-memory image cannot fail
	}
	return b.Bytes()
}
