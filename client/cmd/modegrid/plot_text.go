package main

// Text of the figures. The PNG renderer draws glyphs from the Liberation
// fonts that gonum/plot ships, and those have no superscript minus (U+207B):
// "cm⁻¹" came out as "cm¹". raisedText draws every run of superscript
// characters as its ordinary characters (the minus as U+2212, which the
// fonts have), at supScale of the size and raised by supRaise of it. An SVG
// keeps the text as written: it stays searchable and copyable, and the
// viewer's fonts supply the glyphs.

import (
	"math"
	"strings"

	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Size and rise of a superscript, as fractions of the font size (common
// practice for superscripts: about two thirds of the size, a third up).
const (
	supScale = 0.7
	supRaise = 0.36
)

// superscripts maps each superscript character to the one drawn raised.
var superscripts = map[rune]rune{
	'⁰': '0', '¹': '1', '²': '2', '³': '3', '⁴': '4', '⁵': '5', '⁶': '6', '⁷': '7', '⁸': '8', '⁹': '9',
	'⁺': '+', '⁻': '−', '⁼': '=', '⁽': '(', '⁾': ')',
}

// textRun is a piece of one line: ordinary text, or a superscript run
// already mapped to ordinary characters.
type textRun struct {
	s   string
	sup bool
}

// splitSuperscripts splits a line into ordinary and superscript runs.
func splitSuperscripts(line string) []textRun {
	var runs []textRun
	var b strings.Builder
	sup := false
	flush := func() {
		if b.Len() > 0 {
			runs = append(runs, textRun{b.String(), sup})
			b.Reset()
		}
	}
	for _, r := range line {
		base, isSup := superscripts[r]
		if isSup != sup {
			flush()
			sup = isSup
		}
		if isSup {
			r = base
		}
		b.WriteRune(r)
	}
	flush()
	return runs
}

// raisedText is text.Plain with superscripts drawn raised (see the file
// comment).
type raisedText struct{ text.Plain }

// textRecorder is implemented by a canvas that wants to know the whole
// strings drawn on it (the figure tests), as opposed to the pieces
// FillString receives.
type textRecorder interface {
	DrewText(txt string, fnt font.Font)
}

func (h raisedText) supFont(fnt font.Font) font.Font {
	s := fnt
	s.Size = fnt.Size * supScale
	return s
}

// width is the advance of one line.
func (h raisedText) width(line string, fnt font.Font) vg.Length {
	var w vg.Length
	for _, r := range splitSuperscripts(line) {
		f := fnt
		if r.sup {
			f = h.supFont(fnt)
		}
		face := h.Fonts.Lookup(f, f.Size)
		w += face.Width(r.s)
	}
	return w
}

// Box is the bounding box of a line: its advance, and the font's ascent
// (or the top of a raised run, when higher) and descent.
func (h raisedText) Box(txt string, fnt font.Font) (width, height, depth vg.Length) {
	face := h.Fonts.Lookup(fnt, fnt.Size)
	ext := face.Extents()
	height = ext.Ascent
	for _, r := range splitSuperscripts(txt) {
		if r.sup {
			sf := h.supFont(fnt)
			sface := h.Fonts.Lookup(sf, sf.Size)
			height = max(height, supRaise*fnt.Size+sface.Extents().Ascent)
		}
	}
	return h.width(txt, fnt), height, ext.Descent
}

// Draw draws txt like text.Plain, each superscript run smaller and raised;
// on an SVG canvas the text is written as it is.
func (h raisedText) Draw(c vg.Canvas, txt string, sty text.Style, pt vg.Point) {
	inner := c
	for { // the figure canvases around the device
		if dc, ok := inner.(*draw.Canvas); ok {
			inner = dc.Canvas
		} else if dc, ok := inner.(draw.Canvas); ok {
			inner = dc.Canvas
		} else {
			break
		}
	}
	if r, ok := inner.(textRecorder); ok {
		r.DrewText(txt, sty.Font)
	}
	if _, ok := inner.(*vgsvg.Canvas); ok {
		h.Plain.Draw(c, txt, sty, pt)
		return
	}
	txt = strings.TrimRight(txt, "\n")
	if txt == "" {
		return
	}
	face := h.Fonts.Lookup(sty.Font, sty.Font.Size)
	c.SetColor(sty.Color)
	if sty.Rotation != 0 {
		c.Push()
		c.Rotate(sty.Rotation)
	}
	// Into the rotated frame, as text.Plain does.
	s64, c64 := math.Sincos(sty.Rotation)
	sin, cos := vg.Length(s64), vg.Length(c64)
	pt.X, pt.Y = pt.Y*sin+pt.X*cos, pt.Y*cos-pt.X*sin
	lines := h.Lines(txt)
	pt.Y += sty.Height(txt)*vg.Length(sty.YAlign) - face.Extents().Ascent
	for i, line := range lines {
		x := pt.X + vg.Length(sty.XAlign)*h.width(line, sty.Font)
		y := pt.Y + vg.Length(len(lines)-i)*sty.Font.Size
		for _, r := range splitSuperscripts(line) {
			f, dy := face, vg.Length(0)
			if r.sup {
				sf := h.supFont(sty.Font)
				f, dy = h.Fonts.Lookup(sf, sf.Size), supRaise*sty.Font.Size
			}
			c.FillString(f, vg.Point{X: x, Y: y + dy}, r.s)
			x += f.Width(r.s)
		}
	}
	if sty.Rotation != 0 {
		c.Pop()
	}
}
