package cref_test

import (
	"fmt"
	"strings"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/quant/cref"
)

// Generate the C front end's tables for a model's front end, band
// statistics and input quantisation; the layout goes into the scheme.
func ExampleFrontEndCHeader() {
	cfg := features.DefaultConfig()
	st := &features.BandStats{Version: 1, Mean: make([]float64, cfg.Bands), Std: make([]float64, cfg.Bands)}
	for i := range st.Std {
		st.Mean[i], st.Std[i] = -40, 12
	}
	hdr, lay, err := cref.FrontEndCHeader(cref.FrontEnd{Config: cfg, Stats: st, InputScale: 0.03, InputZeroPoint: -5, Frames: 61, HopFrames: 31}, "yard")
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, l := range strings.Split(hdr, "\n") {
		if strings.HasPrefix(l, "#define YARD_FE_RAM") || strings.HasPrefix(l, "#define YARD_FE_TABLE") {
			fmt.Println(l)
		}
	}
	fmt.Println(lay.StateType, lay.Cost.FeatureBytes)
	// Output:
	// #define YARD_FE_RAM_BYTES 5728
	// #define YARD_FE_TABLE_BYTES 6632
	// yard_fe_state_t 2440
}
