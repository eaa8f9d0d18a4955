// Package quant turns a trained float network into an int8 network whose
// every arithmetic step is integer, and measures what that costs: batch
// norm folding, calibration observers, per-channel weight quantisation,
// fixed-point requantisation, the integer-only reference engine, overflow
// checks and per-layer SQNR.
//
// quant knows networks and numbers, not audio: how inputs were made is
// carried along as opaque metadata.
//
// # Scheme
//
// Affine quantisation after Jacob et al. 2018 (arXiv:1712.05877): real =
// scale·(q − zero_point). Activations: int8 per tensor with a zero point,
// the range widened to include 0 so that 0 (zero padding) is exact.
// Weights: int8 symmetric (zero point 0, values in [−127, 127]) per output
// channel by default, per tensor as an option. Bias: int32 with scale
// input_scale·weight_scale[c]. Each output channel's real multiplier
// M = input_scale·weight_scale[c]/output_scale is a 32-bit mantissa and a
// shift ([QuantizeMultiplier]); requantisation is
// RoundingDivideByPOT(SaturatingRoundingDoublingHighMul(acc, m0), shift)
// + output_zero_point, saturated to the fused activation's clamp (ReLU:
// [zp, 127], ReLU6: [zp, q(6)]). Rounding of real values to integers
// (weights, biases, activations, the mantissa) is half away from zero
// (math.Round). The power-of-two option rounds every scale up to a power
// of two, so each multiplier is an exact power of two (m0 = 2^30).
//
// Average pooling keeps its input's scale and zero point and divides the
// integer window sum by the window size, rounding half away from zero.
//
// # Errors
//
// Networks with layers or orders the engine does not support, and
// calibration that yields unusable ranges, are errors naming the layer.
package quant
