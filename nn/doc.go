// Package nn is pipit's float training engine for compact audio CNNs:
// layers with forward and backward passes side by side, networks built
// from Go values or from a plain-text layer spec, one flat parameter
// buffer, softmax cross-entropy, SGD/Adam/AdamW with schedules and
// clipping, deterministic parallel training, checkpoints, and a cost model
// (MACs, parameters, flash, peak RAM) checked against device profiles.
//
// nn is not a general deep-learning framework: it has the layers small
// keyword-spotting and sound-event CNNs use, in one data layout, on CPU.
// Its kernels are its own (internal/kernels); gorgonia's autodiff and
// PyTorch serve as references in the tests only.
//
// # Shapes and layout
//
// Legend: N batch, C channels (InC, OutC), H and W spatial (OH, OW for
// outputs), K kernel size (KH, KW), S stride (SH, SW), P padding, F frames,
// M mel bands, L classes.
//
// Activations are channels-last (NHWC) row-major float32: element
// (n, h, w, c) of an (N, H, W, C) batch is at index ((n·H + h)·W + w)·C + c.
// For log-mel input H = M (bands), W = F (frames), C = 1, so a features
// matrix (M, F) is one sample as it is. Weights:
//
//	convolution, pointwise   (OutC, KH, KW, InC)
//	depthwise                (KH, KW, C)
//	dense                    (Out, In), In in NHWC order of the input
//
// # Layer spec
//
// A network is written one layer per line; '#' starts a comment; blank
// lines are ignored. Each line is a keyword followed by key=value
// arguments in any order. An optional first line "input shape=HxWxC"
// fixes the input. Sizes are N or HxW (N means NxN).
//
//	input         shape=HxWxC
//	conv          out=N kernel=KHxKW [stride=SHxSW] [pad=P] [bias=true|false]
//	depthwise     kernel=KHxKW [stride=SHxSW] [pad=P] [bias=true|false]
//	pointwise     out=N [bias=true|false]
//	dense         out=N
//	batchnorm     [momentum=0.1] [eps=1e-5]
//	relu | relu6 | relucap max=X
//	maxpool       size=KHxKW [stride=SHxSW] [pad=P]     (stride defaults to size)
//	avgpool       size=KHxKW [stride=SHxSW] [pad=P]
//	globalavgpool
//	dropout       rate=R
//	flatten
//	fakequant     [decay=0.99]                            (quantisation-aware training)
//
// P is "valid" (default), "same" (output ceil(in/stride), the odd padding
// row/column at the bottom/right, as TensorFlow does) or four integers
// "top,bottom,left,right". bias defaults to true. Example: the separable
// reference network is [ArchSpec]("separable", n).
//
// # Training
//
// [Trainer.Step] runs forward with batch statistics, the loss, backward
// (each layer's backward accumulates into Params.Grad, zeroed once per
// step) and an optimiser step. After the first batch of a size nothing
// allocates. Layers split a batch into a fixed number of shards whatever
// GOMAXPROCS is, and reduce per-shard gradients in shard order, so the
// same seed gives bit-identical weights on any number of cores.
//
// # Errors
//
// Bad specs give *[SpecError] (wrapping [ErrSpec]); shapes that cannot be
// planned wrap [ErrShape]; a NaN or infinite loss or gradient wraps
// [ErrNonFinite]; malformed checkpoints give *[FormatError],
// [ErrUnsupportedVersion] or [ErrCheckpointMismatch]. Panics are for
// programmer errors only (slices of the wrong length on hot paths), as
// each method documents.
//
// # Concurrency
//
// A [Network] runs its layers' shards on its own worker goroutines (one
// per GOMAXPROCS at construction); call [Network.Close] to stop them. A
// Network, a [Trainer] and an [Optimizer] are not safe for concurrent use.
package nn
