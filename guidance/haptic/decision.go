package haptic

import "github.com/hewline/hewline/guidance"

// CueFrom turns the guidance package's decision for one estimate into a
// Cue: the offset (pixels) over fullScalePx (for example half the image
// width) gives Offset, and Guide and Alarm are passed through, so only a
// trusted estimate guides.
func CueFrom(d guidance.CueDecision, fullScalePx float64) Cue {
	c := Cue{Guide: d.Guide, Alarm: d.Alarm}
	if d.Guide {
		c.Offset = Normalize(d.Offset, fullScalePx)
	}
	return c
}
