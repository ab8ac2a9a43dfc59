package engine

import (
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"
)

// ErrQuick is wrapped by every quick-entry parse error.
var ErrQuick = errors.New("cannot read layer line")

// QuickSyntax describes the quick-entry line, for help screens.
const QuickSyntax = `kind, then its main value, then options, separated by spaces:
  conv 64 k3 s2 p1        filters 64, kernel 3, stride 2, padding 1 (also: same, valid, d2 dilation, g4 groups, dw depthwise, nobias)
  deconv 32 k4 s2 p1 op1  transposed convolution with output padding 1
  pool max k3 s2 p1 ceil  max or avg pooling
  global-pool avg         pool-to 7      upsample 2 bilinear
  norm batch              norm group g32   norm instance affine   norm layer
  act relu                act leaky-relu 0.2   (gelu, silu, sigmoid, tanh)
  dropout 0.3   flatten   dense 10 nobias   reshape 1024x4x4
  concat NAME crop        add NAME       block 2 residual then relu
  @NAME names the layer; sizes take n or h×w (3x5)`

// ParseQuick reads one quick-entry line such as "conv 64 k3 s2 p1" into a
// layer: the syntax Summary writes, plus "@name".
func ParseQuick(line string) (Layer, error) {
	toks := strings.Fields(strings.ToLower(strings.TrimSpace(line)))
	if len(toks) == 0 {
		return Layer{}, fmt.Errorf("%w: empty; start with a kind such as conv, pool or dense", ErrQuick)
	}
	// Names keep their case.
	orig := strings.Fields(strings.TrimSpace(line))
	k, ok := KindByName(toks[0])
	if !ok {
		if c := CompleteKind(toks[0]); len(c) == 1 {
			return Layer{}, fmt.Errorf("%w: unknown kind %q; did you mean %q?", ErrQuick, toks[0], c[0])
		}
		return Layer{}, fmt.Errorf("%w: unknown kind %q; kinds: %s", ErrQuick, toks[0], strings.Join(names(Kinds()), ", "))
	}
	l := Layer{Kind: k}
	rest, origRest := toks[1:], orig[1:]
	rest, origRest = joinThen(rest), joinThen(origRest)
	main := ""
	if len(rest) > 0 && !strings.HasPrefix(rest[0], "@") && takesMain(k, rest[0]) {
		main = rest[0]
		if k.IsMerge() {
			main = origRest[0] // names keep their case
		}
		rest, origRest = rest[1:], origRest[1:]
	}
	if err := setMain(&l, main); err != nil {
		return Layer{}, err
	}
	for i, t := range rest {
		if strings.HasPrefix(t, "@") {
			name := strings.TrimPrefix(origRest[i], "@")
			if !ValidName(name) {
				return Layer{}, fmt.Errorf("%w: %q is not a layer name; use letters, digits, '_' and '-'", ErrQuick, name)
			}
			l.Name = name
			continue
		}
		if err := quickOption(&l, t); err != nil {
			return Layer{}, err
		}
	}
	if (k == KindConv || k == KindDeconv || k == KindPool) && l.Kernel.IsZero() {
		return Layer{}, fmt.Errorf("%w: %s needs a kernel; add k3 (or k3x5)", ErrQuick, k)
	}
	if k == KindBlock && l.HasPostAct && !l.Residual {
		return Layer{}, fmt.Errorf("%w: \"then %s\" follows a residual addition; add residual", ErrQuick, l.PostAct)
	}
	if k == KindNorm && l.Norm == NormGroup && l.NormGroups == 0 {
		return Layer{}, fmt.Errorf("%w: group norm needs groups; add g32", ErrQuick)
	}
	return l.Normalized(), nil
}

// takesMain reports whether tok is the kind's main value rather than an option.
func takesMain(k Kind, tok string) bool {
	switch k {
	case KindFlatten:
		return false
	case KindAct:
		_, err := ParseChoice("", tok, names(ActKinds()))
		return err == nil
	case KindGlobalPool, KindPool:
		return tok == "max" || tok == "avg"
	case KindNorm:
		_, err := ParseChoice("", tok, names(NormKinds()))
		return err == nil
	case KindBlock:
		_, err := strconv.Atoi(strings.TrimPrefix(tok, "×"))
		return err == nil
	case KindConv, KindDeconv, KindDense, KindDropout, KindPoolTo, KindUpsample, KindReshape:
		return tok[0] >= '0' && tok[0] <= '9' || tok[0] == '.'
	}
	return true
}

// setMain applies the kind's main value (empty when left out).
func setMain(l *Layer, v string) error {
	need := func(what string) error {
		if v == "" {
			return fmt.Errorf("%w: %s needs %s", ErrQuick, l.Kind, what)
		}
		return nil
	}
	wrap := func(err error) error {
		if err != nil {
			return fmt.Errorf("%w: %v", ErrQuick, err)
		}
		return nil
	}
	var err error
	switch l.Kind {
	case KindConv, KindDeconv:
		if err = need("a filter count, e.g. " + l.Kind.String() + " 64 k3"); err != nil {
			return err
		}
		l.Filters, err = ParseInt("filters", v, 1, MaxChannels)
	case KindDense:
		if err = need("a unit count, e.g. dense 10"); err != nil {
			return err
		}
		l.Filters, err = ParseInt("units", v, 1, MaxChannels)
	case KindPool:
		if err = need("max or avg, e.g. pool max k2"); err != nil {
			return err
		}
		l.Pool = PoolMode(map[string]int{"max": 0, "avg": 1}[v])
	case KindGlobalPool:
		l.Pool = PoolAvg
		if v == "max" {
			l.Pool = PoolMax
		}
	case KindPoolTo:
		if err = need("an output size, e.g. pool-to 7"); err != nil {
			return err
		}
		l.Size, err = ParsePair("size", v, 1, MaxSpatial)
	case KindUpsample:
		if err = need("a factor, e.g. upsample 2"); err != nil {
			return err
		}
		l.Factor, err = ParsePair("factor", v, 1, MaxFactor)
	case KindNorm:
		if err = need("a type: batch, group, instance or layer"); err != nil {
			return err
		}
		i, _ := ParseChoice("type", v, names(NormKinds()))
		l.Norm = NormKind(i)
	case KindAct:
		if err = need("a function: " + strings.Join(names(ActKinds()), ", ")); err != nil {
			return err
		}
		i, _ := ParseChoice("function", v, names(ActKinds()))
		l.Act = ActKind(i)
	case KindDropout:
		if err = need("a rate, e.g. dropout 0.3"); err != nil {
			return err
		}
		l.Rate, err = ParseRate("rate", v)
	case KindReshape:
		if err = need("a target, e.g. reshape 1024x4x4"); err != nil {
			return err
		}
		l.Target, err = ParseShape("target", v)
	case KindBlock:
		l.Repeat = 1
		if v != "" {
			l.Repeat, err = ParseInt("repeat", strings.TrimPrefix(v, "×"), 1, MaxRepeat)
		}
	case KindConcat, KindAdd:
		if err = need("the name of an earlier layer, e.g. " + l.Kind.String() + " skip1"); err != nil {
			return err
		}
		if !ValidName(v) {
			return fmt.Errorf("%w: %q is not a layer name", ErrQuick, v)
		}
		l.From = v
	}
	return wrap(err)
}

// quickOption applies one option token such as "k3", "s2", "same", "nobias".
func quickOption(l *Layer, t string) error {
	bad := func() error {
		return fmt.Errorf("%w: %q does not apply to %s; see the help (?) for its options", ErrQuick, t, l.Kind)
	}
	wrap := func(err error) error {
		if err != nil {
			return fmt.Errorf("%w: %v", ErrQuick, err)
		}
		return nil
	}
	spatial := l.Kind == KindConv || l.Kind == KindDeconv || l.Kind == KindPool
	conv := l.Kind == KindConv || l.Kind == KindDeconv
	var err error
	switch {
	case t == "nobias" && l.Kind.HasWeights():
		l.NoBias = true
	case (t == "same" || t == "valid") && conv:
		l.Pad, err = ParsePadding("pad", t)
	case t == "dw" && conv:
		l.Depthwise = true
	case t == "ceil" && l.Kind == KindPool:
		l.Ceil = true
	case (t == "bilinear" || t == "nearest") && l.Kind == KindUpsample:
		l.Upsample = UpNearest
		if t == "bilinear" {
			l.Upsample = UpBilinear
		}
	case (t == "affine" || t == "noaffine") && l.Kind == KindNorm:
		l.Affine = On
		if t == "noaffine" {
			l.Affine = Off
		}
	case t == "crop" && l.Kind.IsMerge():
		l.Crop = true
	case t == "residual" && l.Kind == KindBlock:
		l.Residual = true
	case t == "strides-all" && l.Kind == KindBlock:
		l.AllStrides = true
	case strings.HasPrefix(t, "then ") && l.Kind == KindBlock:
		i, perr := ParseChoice("then", strings.TrimPrefix(t, "then "), names(ActKinds()))
		if perr != nil {
			return wrap(perr)
		}
		l.PostAct, l.HasPostAct = ActKind(i), true
	case strings.HasPrefix(t, "op") && l.Kind == KindDeconv:
		l.OutPad, err = ParsePair("out-pad", t[2:], 0, MaxWindow)
	case strings.HasPrefix(t, "k") && spatial:
		l.Kernel, err = ParsePair("kernel", t[1:], 1, MaxWindow)
	case strings.HasPrefix(t, "s") && spatial:
		l.Stride, err = ParsePair("stride", t[1:], 1, MaxWindow)
	case strings.HasPrefix(t, "p") && spatial:
		var p Pair
		p, err = ParsePair("pad", t[1:], 0, MaxWindow)
		l.Pad = Padding{Size: p}
	case strings.HasPrefix(t, "d") && conv:
		l.Dilation, err = ParsePair("dilation", t[1:], 1, MaxWindow)
	case strings.HasPrefix(t, "g") && conv:
		l.Groups, err = ParseInt("groups", t[1:], 1, MaxChannels)
	case strings.HasPrefix(t, "g") && l.Kind == KindNorm:
		l.NormGroups, err = ParseInt("groups", t[1:], 1, MaxChannels)
	case l.Kind == KindAct && l.Act == ActLeakyReLU:
		v, perr := strconv.ParseFloat(t, 64)
		if perr != nil || v < 0 || v >= 1e6 {
			return bad()
		}
		l.Slope = v
	default:
		return bad()
	}
	return wrap(err)
}

// joinThen joins "then" with the token after it ("then relu").
func joinThen(toks []string) []string {
	out := make([]string, 0, len(toks))
	for i := 0; i < len(toks); i++ {
		if strings.EqualFold(toks[i], "then") && i+1 < len(toks) {
			out = append(out, "then "+toks[i+1])
			i++
			continue
		}
		out = append(out, toks[i])
	}
	return out
}

// CompleteKind returns the kind names that start with prefix, sorted.
func CompleteKind(prefix string) []string {
	var out []string
	for _, n := range names(Kinds()) {
		if strings.HasPrefix(n, strings.ToLower(prefix)) {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}

// NewLayer returns a layer of kind k with the defaults the editor inserts,
// sized for an input with c channels.
func NewLayer(k Kind, c int64) Layer {
	c = max(c, 1)
	switch k {
	case KindConv:
		return Layer{Kind: k, Filters: c, Kernel: Square(3), Pad: Padding{Size: Square(1)}}
	case KindDeconv:
		return Layer{Kind: k, Filters: max(c/2, 1), Kernel: Square(4), Stride: Square(2), Pad: Padding{Size: Square(1)}}
	case KindPool:
		return Layer{Kind: k, Pool: PoolMax, Kernel: Square(2)}
	case KindGlobalPool:
		return Layer{Kind: k, Pool: PoolAvg}
	case KindPoolTo:
		return Layer{Kind: k, Size: Square(7)}
	case KindUpsample:
		return Layer{Kind: k, Factor: Square(2)}
	case KindNorm:
		return Layer{Kind: k, Norm: NormBatch}
	case KindDropout:
		return Layer{Kind: k, Rate: 0.2}
	case KindDense:
		return Layer{Kind: k, Filters: 10}
	case KindReshape:
		return Layer{Kind: k, Target: Shape{c, 1, 1}}
	case KindBlock:
		return Layer{Kind: k, Repeat: 1}
	case KindConcat, KindAdd:
		return Layer{Kind: k}
	}
	return Layer{Kind: k}
}
