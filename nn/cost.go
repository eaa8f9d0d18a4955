package nn

import (
	"fmt"
	"sort"
	"strings"
)

// LayerCost is the cost of one layer for one inference.
type LayerCost struct {
	Index    int    `json:"index"`
	Kind     string `json:"kind"`
	Out      Shape  `json:"-"`
	OutShape string `json:"out_shape"`
	MACs     int64  `json:"macs"`      // multiply-accumulates (convolution, depthwise, pointwise, dense only)
	Params   int    `json:"params"`    // trainable parameters
	OutBytes int64  `json:"out_bytes"` // output activation at the report's element size
	InPlace  bool   `json:"in_place"`  // elementwise: shares its input's buffer in the memory plan
}

// CostReport is the cost model of a network for one inference at one
// activation element size.
//
// Conventions (MobileNets, Howard et al. 2017, §3.1): a multiply-
// accumulate is counted per kernel tap per output value, K_H·K_W·InC·OutC·OH·OW
// for a convolution, K_H·K_W·C·OH·OW for a depthwise one, In·Out for a dense
// layer; batch norm, bias, activations and pooling are not counted.
//
// Memory plan: activations of a chain live in one pool in which at most two
// tensors are alive at a time, the input and the output of the layer being
// run; elementwise layers (batch norm, which is folded into the preceding
// layer for deployment, ReLU/ReLU6, dropout, flatten) run in place.
// RAMBytes is the peak of in + out over the materialised layers, at
// ElemBytes per value. Work buffers of a particular runtime (e.g. im2col)
// are not included.
//
// Flash: with ElemBytes 4 every trainable parameter and batch-norm
// statistic as float32; with ElemBytes 1 the int8 deployment form, in which
// batch norm is folded into the preceding layer and each convolution,
// depthwise, pointwise and dense layer stores int8 weights, an int32 bias
// per output channel and an int32 multiplier and int32 shift per output
// channel (see package quant).
type CostReport struct {
	Input      Shape       `json:"-"`
	InputShape string      `json:"input_shape"`
	ElemBytes  int         `json:"elem_bytes"`
	Layers     []LayerCost `json:"layers"`
	MACs       int64       `json:"macs"`
	Params     int         `json:"params"`
	FlashBytes int64       `json:"flash_bytes"`
	RAMBytes   int64       `json:"ram_bytes"`
	PeakLayer  int         `json:"peak_layer"` // index of the layer at which RAMBytes is reached
}

// Cost returns the cost model of net at elemBytes per activation value (4
// for float32, 1 for int8). It panics for other element sizes.
func Cost(net *Network, elemBytes int) CostReport {
	if elemBytes != 1 && elemBytes != 4 {
		panic(fmt.Sprintf("nn: Cost: element size %d, want 1 or 4", elemBytes))
	}
	r := CostReport{Input: net.Input, InputShape: net.Input.String(), ElemBytes: elemBytes, PeakLayer: -1}
	live := int64(net.Input.Size()) // size of the current materialised tensor
	perEntry := map[int]int{}
	for _, e := range net.Params.Entries {
		var li int
		fmt.Sscanf(e.Name, "%d.", &li)
		perEntry[li] += e.Size
	}
	for i, l := range net.Layers {
		out := net.Shapes[i]
		c := LayerCost{Index: i, Kind: l.Kind(), Out: out, OutShape: out.String(), Params: perEntry[i], OutBytes: int64(out.Size()) * int64(elemBytes)}
		if m, ok := l.(macLayer); ok {
			c.MACs = m.macs()
		}
		if _, ok := l.(inPlaceLayer); ok {
			c.InPlace = true
		} else {
			if peak := (live + int64(out.Size())) * int64(elemBytes); peak > r.RAMBytes {
				r.RAMBytes, r.PeakLayer = peak, i
			}
			live = int64(out.Size())
		}
		r.MACs += c.MACs
		r.Params += c.Params
		r.Layers = append(r.Layers, c)
		if elemBytes == 1 {
			if _, ok := l.(macLayer); ok {
				outC := int64(out.C)
				weights := int64(c.Params)
				if b := biasCount(l); b > 0 {
					weights -= int64(b)
				}
				r.FlashBytes += weights + outC*(4+4+4)
			}
		}
	}
	if elemBytes == 4 {
		r.FlashBytes = 4 * int64(len(net.Params.Data)+len(net.Params.State))
	}
	return r
}

func biasCount(l Layer) int {
	switch v := l.(type) {
	case *Conv2D:
		return len(v.Bias)
	case *Depthwise:
		return len(v.Bias)
	case *Dense:
		return len(v.Bias)
	}
	return 0
}

// RuntimeCodeBytes is the code size of pipit's C reference runtime
// (quant/cref/c/pipit_rt.c) for a Cortex-M4, as measured: the .text of
// pipit_rt.o from arm-none-eabi-gcc 12.2.1 (Debian 15:12.2.rel1-1) with
// -mcpu=cortex-m4 -mthumb -mfpu=fpv4-sp-d16 -mfloat-abi=hard -O2
// -ffunction-sections. It does not depend on the network (the runtime reads
// its layer table; pipit_check with the CRC and the table bounds included); the emulated-board test (quant/m4_test.go) re-measures
// it and fails when it drifts by more than a quarter.
const RuntimeCodeBytes = 2576

// InferencesPerSecond returns how often a model reading windowSeconds of
// audio runs when consecutive windows overlap by the fraction overlap
// (0 ≤ overlap < 1): 1 / (windowSeconds·(1 − overlap)).
func InferencesPerSecond(windowSeconds, overlap float64) (float64, error) {
	if !(windowSeconds > 0) || !(overlap >= 0 && overlap < 1) {
		return 0, fmt.Errorf("nn: window %g s and overlap %g: want a positive window and overlap in [0, 1)", windowSeconds, overlap)
	}
	return 1 / (windowSeconds * (1 - overlap)), nil
}

// Profile is a device budget for the ML part of a sensor.
type Profile struct {
	Name          string  `json:"name"`
	RAMBytes      int64   `json:"ram_bytes"`
	FlashBytes    int64   `json:"flash_bytes"`
	MACsPerSecond float64 `json:"macs_per_second"`
	Note          string  `json:"note"`
}

// Profiles are the built-in device budgets. The figures are rules of thumb
// of the trade (common practice, no published source): roughly half of a
// Cortex-M4F class chip at 80 MHz set aside for ML.
var Profiles = map[string]Profile{
	"m4-half": {Name: "m4-half", RAMBytes: 64 << 10, FlashBytes: 512 << 10, MACsPerSecond: 4.5e6,
		Note: "half of a Cortex-M4-class chip for ML: 64 KiB RAM, 512 KiB flash, 4.5 M MAC/s (rule of thumb)"},
	"m4-full": {Name: "m4-full", RAMBytes: 128 << 10, FlashBytes: 1 << 20, MACsPerSecond: 9e6,
		Note: "a whole Cortex-M4-class chip: 128 KiB RAM, 1 MiB flash, 9 M MAC/s (rule of thumb)"},
}

// ProfileNames returns the built-in profile names, sorted.
func ProfileNames() []string {
	var s []string
	for k := range Profiles {
		s = append(s, k)
	}
	sort.Strings(s)
	return s
}

// LookupProfile returns the named built-in profile.
func LookupProfile(name string) (Profile, error) {
	p, ok := Profiles[name]
	if !ok {
		return Profile{}, fmt.Errorf("nn: unknown device profile %q (have %s)", name, strings.Join(ProfileNames(), ", "))
	}
	return p, nil
}

// Verdict says whether a model fits a profile, resource by resource.
type Verdict struct {
	Profile       Profile `json:"profile"`
	RAMFits       bool    `json:"ram_fits"`
	FlashFits     bool    `json:"flash_fits"`
	ComputeFits   bool    `json:"compute_fits"`
	Fits          bool    `json:"fits"`
	RAMUse        float64 `json:"ram_use"` // fraction of the budget used
	FlashUse      float64 `json:"flash_use"`
	ComputeUse    float64 `json:"compute_use"`
	MACsPerSecond float64 `json:"macs_per_second"`
}

// Check compares r, run at inferencesPerSecond, with p.
func (r CostReport) Check(p Profile, inferencesPerSecond float64) Verdict {
	v := Verdict{Profile: p, MACsPerSecond: float64(r.MACs) * inferencesPerSecond}
	v.RAMUse = float64(r.RAMBytes) / float64(p.RAMBytes)
	v.FlashUse = float64(r.FlashBytes) / float64(p.FlashBytes)
	v.ComputeUse = v.MACsPerSecond / p.MACsPerSecond
	v.RAMFits, v.FlashFits, v.ComputeFits = v.RAMUse <= 1, v.FlashUse <= 1, v.ComputeUse <= 1
	v.Fits = v.RAMFits && v.FlashFits && v.ComputeFits
	return v
}
