// Package sweep searches a design space of front-end settings, networks
// and quantisation choices for the most accurate int8 model that fits a
// device profile. A grid file ([ParseGrid]) is expanded ([Expand]) into
// independent jobs, each a self-contained JSON spec; points whose
// whole-path cost (the C front end of package features plus the int8
// network of package nn) exceeds the profile are pruned before any
// training. [Run] trains the jobs that have no valid result yet, through a
// [TrainFunc] the caller supplies (cross-validated training, int8
// calibration and evaluation per fold), writing each result atomically
// next to its spec, so a killed sweep re-run finishes only what is
// missing, and array tasks of a batch scheduler can share one directory.
// [Merge] reads the results into a [Report] whose bytes do not depend on
// the order jobs finished in, with the Pareto front of int8 accuracy
// against compute among the models that fit.
//
// # Grid files
//
// A grid file is UTF-8 text, one key per line, its values separated by
// blanks; "#" starts a comment. The first line that is not blank or a
// comment must be "pipit-grid 1". A key may appear once. Axis keys take
// one or more values and the grid is their Cartesian product; setting keys
// take exactly one value. A missing key takes its default.
//
//	pipit-grid 1
//	# two band counts × two hops × two widths of separable = 8 points
//	bands  40 20
//	hop    256 512
//	arch   separable
//	width  0.5 1
//	epochs 12
//
// Axes (default in brackets):
//
//	rate     sample rate, Hz [16000]
//	window   window and FFT length, samples, a power of two [512]
//	hop      hop between frames, samples [256]
//	bands    mel bands [40]
//	fmax     highest band edge, Hz, or "nyquist" [nyquist]
//	arch     pooled, strided or separable [separable]
//	width    channel multiplier, channels rounded to multiples of 8 [1]
//	blocks   depthwise-separable blocks, separable only, 1..8 [3]
//	overlap  overlap of consecutive inference windows on the device [0.5]
//	method   activation calibration: minmax, percentile, mse, auto [auto]
//	scheme   weights: per-channel, per-tensor, pow2 [per-channel]
//
// Settings:
//
//	seconds        audio per inference (the network's window), s [1]
//	epochs         epochs per fold at most [10]
//	batch          batch size [32]
//	patience       early-stopping patience, 0 for none [0]
//	lr             peak learning rate [0.005]
//	seed           weights, shuffling, augmentation, fold assignment [1]
//	folds          folds to assign when the corpus has none [5]
//	augment        on or off [on]
//	train-overlap  overlap of windows cut from the clips for training [0.5]
//
// Points that differ only in a knob that does not apply (blocks of pooled
// or strided) are one point. The other front-end settings are those of
// features.DefaultConfig.
//
// # Sweep directories
//
// A sweep directory holds plan.json (the grid's expansion, including the
// pruned points and why) and, in jobs/, job-NNNN.json (the spec of job
// NNNN, numbered from 0 so that array task i runs job i),
// job-NNNN.result.json (its result, written atomically, carrying the
// SHA-256 of the spec it answers) and job-NNNN.work/ (its models and
// training logs).
package sweep
