package engine

import "strconv"

// MaxDepth is the deepest nesting a path can record.
const MaxDepth = 7

// MaxSegment is the largest item number one path segment can hold.
const MaxSegment = 1<<16 - 1

// Path locates a row in the flattened stack: 1-based item numbers, one per
// nesting level ("4.2.1" is item 4, repeat 2, layer 1). It is a value type
// so that evaluating a stack allocates no path strings.
type Path struct {
	n   uint8
	seg [MaxDepth]uint16
}

// Append returns the path extended by one 1-based segment. Segments past
// MaxDepth are dropped and numbers past MaxSegment are clamped (stack files
// are limited well below both).
func (p Path) Append(i int) Path {
	p.push(i)
	return p
}

// push appends a segment in place.
func (p *Path) push(i int) {
	if int(p.n) < MaxDepth {
		p.seg[p.n] = uint16(min(max(i, 0), MaxSegment))
		p.n++
	}
}

// Len returns the number of segments.
func (p Path) Len() int { return int(p.n) }

// At returns segment i (0-based).
func (p Path) At(i int) int { return int(p.seg[i]) }

// String formats the path as dot-separated numbers, e.g. "4.2.1".
func (p Path) String() string {
	var buf [MaxDepth * 11]byte
	b := buf[:0]
	for i := 0; i < int(p.n); i++ {
		if i > 0 {
			b = append(b, '.')
		}
		b = strconv.AppendUint(b, uint64(p.seg[i]), 10)
	}
	return string(b)
}
