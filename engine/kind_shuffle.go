package engine

import "fmt"

// shuffleSpec is the channel shuffle of ShuffleNet (Zhang et al. 2018;
// Ma et al. 2018, ShuffleNet V2): the C channels, seen as g groups of C/g,
// are interleaved so that output channel g·i + j is input channel
// (C/g)·j + i. It reuses Layer.Groups (zero means 1).
var shuffleSpec = Spec{
	Kind: KindShuffle, Key: "shuffle", Help: "interleave the channels of g groups (channel shuffle)", Example: "shuffle g2",
	Main: &Param{Key: "groups", Help: "channel groups, dividing the channels, e.g. 2", Type: TInt, Lo: 1, Hi: MaxChannels,
		Label: "groups", Quick: "g", Need: "a group count",
		get: func(l *Layer) Value { return Value{Int: shuffleGroups(l)} },
		set: func(l *Layer, v Value) { l.Groups = v.Int }},
	eval: func(c *calc, f *flow) {
		in, g := c.row.In, shuffleGroups(c.l)
		if !c.atLeast("groups", g, 1) {
			return
		}
		if in.C%g != 0 {
			c.fail(Diagnostic{Code: ErrShuffleGroups, Field: "groups", A: in.C, B: g})
			return
		}
		c.row.Out = in
	},
	explain: func(row *Row) []string {
		c, g := row.In.C, shuffleGroups(row.Layer)
		if g < 1 {
			return nil
		}
		return []string{
			fmt.Sprintf("%d channels = %d groups × %d", c, g, c/g),
			fmt.Sprintf("output channel %d·i + j ← input channel %d·j + i (i < %d, j < %d); 0 params, 0 MACs", g, c/g, c/g, g),
		}
	},
	// A reshape, a transpose and a copy: autograd keeps nothing.
	torch: func(row *Row) Torch {
		in, g := row.In, shuffleGroups(row.Layer)
		// PyTorch 1.13's nn.ChannelShuffle has no backward, so the export
		// writes the permutation out.
		return Torch{Expr: fmt.Sprintf("x.reshape(x.shape[0], %d, %d, %d, %d).transpose(1, 2).reshape(x.shape[0], %d, %d, %d)",
			g, in.C/max(g, 1), in.H, in.W, in.C, in.H, in.W)}
	},
}

// shuffleGroups returns a shuffle's group count (zero means 1).
func shuffleGroups(l *Layer) int64 {
	if l.Groups == 0 {
		return 1
	}
	return l.Groups
}
