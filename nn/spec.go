package nn

import (
	"fmt"
	"strconv"
	"strings"
)

// ParseSpec parses a layer spec (grammar in the package doc) into layers
// and, if the spec has an "input" line, the input shape (ok reports
// whether it had one). Errors are *[SpecError] values naming the line.
func ParseSpec(text string) (layers []Layer, in Shape, ok bool, err error) {
	lines := strings.Split(text, "\n")
	for i, raw := range lines {
		line := raw
		if j := strings.IndexByte(line, '#'); j >= 0 {
			line = line[:j]
		}
		fields := strings.Fields(line)
		if len(fields) == 0 {
			continue
		}
		bad := func(format string, args ...any) error {
			return &SpecError{Line: i + 1, Text: strings.TrimSpace(raw), Reason: fmt.Sprintf(format, args...)}
		}
		kind := strings.ToLower(fields[0])
		args := map[string]string{}
		for _, f := range fields[1:] {
			k, v, found := strings.Cut(f, "=")
			if !found || k == "" || v == "" {
				return nil, Shape{}, false, bad("argument %q is not key=value", f)
			}
			if _, dup := args[k]; dup {
				return nil, Shape{}, false, bad("argument %q given twice", k)
			}
			args[k] = v
		}
		a := &specArgs{m: args}
		var l Layer
		switch kind {
		case "input":
			if ok || len(layers) > 0 {
				return nil, Shape{}, false, bad("input must be the first line, once")
			}
			h, w, c := a.triple("shape")
			in, ok = Shape{h, w, c}, true
		case "conv":
			kh, kw := a.pair("kernel", 0)
			sh, sw := a.pair("stride", 1)
			l = NewConv2D(Conv2DConfig{Out: a.int("out", 0), KH: kh, KW: kw, SH: sh, SW: sw, Pad: a.pad(), Bias: a.bool("bias", true)})
		case "pointwise":
			l = NewPointwise(a.int("out", 0), a.bool("bias", true))
		case "depthwise":
			kh, kw := a.pair("kernel", 0)
			sh, sw := a.pair("stride", 1)
			l = NewDepthwise(DepthwiseConfig{KH: kh, KW: kw, SH: sh, SW: sw, Pad: a.pad(), Bias: a.bool("bias", true)})
		case "dense":
			l = NewDense(a.int("out", 0))
		case "batchnorm":
			l = NewBatchNorm(a.float("momentum", 0.1), a.float("eps", 1e-5))
		case "relu":
			l = NewReLU()
		case "relu6":
			l = NewReLU6()
		case "relucap":
			l = &ReLU{Cap: float32(a.float("max", 0))}
		case "maxpool", "avgpool":
			kh, kw := a.pair("size", 0)
			sh, sw := a.pair("stride", 0)
			l = newPool(kind == "maxpool", kh, kw, sh, sw, a.pad())
		case "globalavgpool":
			l = NewGlobalAvgPool()
		case "dropout":
			l = NewDropout(a.float("rate", 0))
		case "flatten":
			l = NewFlatten()
		case "fakequant":
			l = NewFakeQuant(a.float("decay", 0.99))
		default:
			return nil, Shape{}, false, bad("unknown layer %q", fields[0])
		}
		if a.err != nil {
			return nil, Shape{}, false, bad("%v", a.err)
		}
		if len(a.m) > 0 {
			for k := range a.m {
				return nil, Shape{}, false, bad("%s takes no argument %q", kind, k)
			}
		}
		if l != nil {
			layers = append(layers, l)
		}
	}
	if len(layers) == 0 {
		return nil, Shape{}, false, &SpecError{Line: len(lines), Reason: "no layers"}
	}
	return layers, in, ok, nil
}

// FromSpec parses text and builds the network. If the spec has an input
// line it must agree with in (when in is non-zero); a zero in takes the
// spec's.
func FromSpec(text string, in Shape, seed uint64) (*Network, error) {
	return fromSpecBounded(text, in, seed, MaxParams)
}

func fromSpecBounded(text string, in Shape, seed uint64, maxParams int) (*Network, error) {
	layers, specIn, ok, err := ParseSpec(text)
	if err != nil {
		return nil, err
	}
	switch {
	case ok && in != (Shape{}) && in != specIn:
		return nil, shapeErr("spec input %v differs from %v", specIn, in)
	case ok:
		in = specIn
	case in == (Shape{}):
		return nil, shapeErr("spec has no input line and no input shape was given")
	}
	return newBounded(in, layers, seed, maxParams)
}

// specArgs reads and consumes key=value arguments, keeping the first error.
type specArgs struct {
	m   map[string]string
	err error
}

func (a *specArgs) take(k string) (string, bool) {
	v, ok := a.m[k]
	delete(a.m, k)
	return v, ok
}

func (a *specArgs) fail(format string, args ...any) {
	if a.err == nil {
		a.err = fmt.Errorf(format, args...)
	}
}

func (a *specArgs) int(k string, def int) int {
	v, ok := a.take(k)
	if !ok {
		if def == 0 {
			a.fail("missing %s=", k)
		}
		return def
	}
	n, err := strconv.Atoi(v)
	if err != nil || n < 1 || n > 1<<20 {
		a.fail("%s=%s is not a positive integer", k, v)
	}
	return n
}

func (a *specArgs) float(k string, def float64) float64 {
	v, ok := a.take(k)
	if !ok {
		return def
	}
	f, err := strconv.ParseFloat(v, 64)
	if err != nil {
		a.fail("%s=%s is not a number", k, v)
	}
	return f
}

func (a *specArgs) bool(k string, def bool) bool {
	v, ok := a.take(k)
	if !ok {
		return def
	}
	b, err := strconv.ParseBool(v)
	if err != nil {
		a.fail("%s=%s is not true or false", k, v)
	}
	return b
}

// pair reads "AxB" or "A"; def 0 means required.
func (a *specArgs) pair(k string, def int) (int, int) {
	v, ok := a.take(k)
	if !ok {
		if def == 0 && k != "stride" {
			a.fail("missing %s=", k)
		}
		return def, def
	}
	parts := strings.Split(v, "x")
	nums := make([]int, len(parts))
	for i, p := range parts {
		n, err := strconv.Atoi(p)
		if err != nil || n < 1 || n > 1<<16 {
			a.fail("%s=%s: want N or NxM with positive integers", k, v)
			return def, def
		}
		nums[i] = n
	}
	switch len(nums) {
	case 1:
		return nums[0], nums[0]
	case 2:
		return nums[0], nums[1]
	}
	a.fail("%s=%s: want N or NxM", k, v)
	return def, def
}

func (a *specArgs) triple(k string) (int, int, int) {
	v, ok := a.take(k)
	parts := strings.Split(v, "x")
	if !ok || len(parts) != 3 {
		a.fail("%s= must be HxWxC", k)
		return 0, 0, 0
	}
	var n [3]int
	for i, p := range parts {
		x, err := strconv.Atoi(p)
		if err != nil || x < 1 || x > 1<<16 {
			a.fail("%s=%s: want HxWxC with positive integers", k, v)
			return 0, 0, 0
		}
		n[i] = x
	}
	return n[0], n[1], n[2]
}

func (a *specArgs) pad() Padding {
	v, ok := a.take("pad")
	if !ok {
		return Padding{Mode: PadValid}
	}
	switch v {
	case PadValid, PadSame:
		return Padding{Mode: v}
	}
	parts := strings.Split(v, ",")
	if len(parts) != 4 {
		a.fail("pad=%s: want same, valid or top,bottom,left,right", v)
		return Padding{Mode: PadValid}
	}
	var n [4]int
	for i, p := range parts {
		x, err := strconv.Atoi(p)
		if err != nil || x < 0 || x > 1<<16 {
			a.fail("pad=%s: padding must be non-negative integers", v)
			return Padding{Mode: PadValid}
		}
		n[i] = x
	}
	return Padding{Mode: PadExplicit, Top: n[0], Bottom: n[1], Left: n[2], Right: n[3]}
}
