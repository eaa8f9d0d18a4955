// Package quant turns a trained float network into an int8 network whose
// every arithmetic step is integer, and measures what that costs: batch
// norm folding, calibration of activation ranges, per-channel weight quantisation,
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
// shift ([EncodeRescale]); requantisation is
// ShiftRightRound(MulQ31Round(acc, m0), shift)
// + output_zero_point, saturated to the fused activation's clamp (ReLU:
// [zp, 127], ReLU6: [zp, q(6)]). Rounding of real values to integers
// (weights, biases, activations, the mantissa) is half away from zero
// (math.Round). The power-of-two option rounds every scale up to a power
// of two, so each multiplier is an exact power of two (m0 = 2^30).
//
// Average pooling keeps its input's scale and zero point and divides the
// integer window sum by the window size, rounding half away from zero.
//
// # File format
//
// Two formats. The quantised model file ([Model.WriteFile]) is pipit's own
// working format: "PIPITQM1", uint32 version, uint32 JSON length, the
// [Model] as JSON, CRC-32. The device export ([Export]) is a flat blob
// (version [BlobVersion]) and a JSON scheme description (version
// [SchemeVersion]):
//
//	blob   offset 0   "PIPITBLB"
//	       offset 8   uint32 version (BlobVersion)
//	       offset 12  uint32 total length
//	       offset 16  uint32 CRC-32 (IEEE) of bytes [20, total)
//	       offset 20  uint32 section count S
//	       offset 24  S × {uint32 kind, layer, offset, length}
//	       then 4-byte aligned sections: 1 int8 weights ((OutC, KH, KW, InC);
//	       depthwise (KH, KW, C); dense (Out, In)), 2 int32 bias, 3 int32
//	       multiplier, 4 int32 shift, each per output channel
//
// The scheme ([SchemeDoc], "format": "pipit-scheme") carries the blob's
// size, CRC-32 and SHA-256, the model info (front end, normalisation, classes, window),
// the quantisation rules in words, input and output shapes and parameters,
// every layer in execution order (op, shapes, kernel, stride, leading
// padding, input and output buffer ids, activation and clamp, input and
// output scale and zero point, weight scales, its blob sections with
// offset, length, type and layout, MACs), the memory plan (pool size and
// each buffer's offset and size) and totals (flash, weight and overhead
// bytes, RAM, MACs), the generated C headers of the export, and its seal:
// the SHA-256 of its own canonical content ([SchemeDigest]), which every
// generated header records too. All little-endian. Every field is
// described in docs/export-format.md; [Import] rejects with [ErrFormat] a
// damaged blob, a scheme edited after export (its seal no longer matches)
// or one that describes another blob, and [ImportFiles] also a header of
// another export. Readers reject unknown versions. [CHeader] renders blob
// and layer table as C for quant/cref/c/pipit_rt.h.
//
// # Errors
//
// Networks with layers or orders the engine does not handle, and
// calibration that yields unusable ranges, are errors naming the layer.
package quant
