package engine

import "strconv"

// MaxDepth is the deepest nesting a path can record.
const MaxDepth = 7

// MaxSegment is the largest item number one path segment can hold.
const MaxSegment = 0xFFEF

// Segments that name the rows a residual block adds after each repeat.
const (
	SegShortcut     = 0xFFF1 // projection convolution, shown "s1"
	SegShortcutNorm = 0xFFF2 // batch norm after it, shown "s2"
	SegResidualAdd  = 0xFFFA // the addition, shown "add"
	SegPostAct      = 0xFFFB // activation after the addition, shown "act"
	SegGateMul      = 0xFFFC // the multiplication by a gate, shown "mul"
	SegDenseCat     = 0xFFFD // a densely linked repeat's concatenation, shown "cat"
	SegJoin         = 0xFFFE // a fork's concatenation of its branches, shown "join"
)

// seg clamps a 1-based item number into a regular segment.
func seg(i int) uint16 { return uint16(min(max(i, 0), MaxSegment)) }

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
		p.seg[p.n] = seg(i)
		p.n++
	}
}

// Len returns the number of segments.
func (p Path) Len() int { return int(p.n) }

// HasPrefix reports whether q is p itself or lies inside it.
func (p Path) HasPrefix(q Path) bool {
	if q.n > p.n {
		return false
	}
	for i := 0; i < int(q.n); i++ {
		if p.seg[i] != q.seg[i] {
			return false
		}
	}
	return true
}

// Parent returns the path without its last segment.
func (p Path) Parent() Path {
	if p.n > 0 {
		p.n--
		p.seg[p.n] = 0
	}
	return p
}

// At returns segment i (0-based).
func (p Path) At(i int) int { return int(p.seg[i]) }

// String formats the path as dot-separated numbers, e.g. "4.2.1".
func (p Path) String() string {
	var buf [MaxDepth * 11]byte
	return string(p.AppendTo(buf[:0]))
}

// AppendTo appends the path as String formats it to b and returns the
// extended slice; it allocates only when b lacks room.
func (p Path) AppendTo(b []byte) []byte {
	for i := 0; i < int(p.n); i++ {
		if i > 0 {
			b = append(b, '.')
		}
		switch v := p.seg[i]; v {
		case SegShortcut:
			b = append(b, "s1"...)
		case SegShortcutNorm:
			b = append(b, "s2"...)
		case SegResidualAdd:
			b = append(b, "add"...)
		case SegPostAct:
			b = append(b, "act"...)
		case SegGateMul:
			b = append(b, "mul"...)
		case SegDenseCat:
			b = append(b, "cat"...)
		case SegJoin:
			b = append(b, "join"...)
		default:
			b = strconv.AppendUint(b, uint64(v), 10)
		}
	}
	return b
}
