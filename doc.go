// Package pipit is the path from labelled sound recordings to a verified
// int8 classifier for a microcontroller, as library calls: what the pipit
// command does, for scripts that import it.
//
// # Overview
//
// A run goes through these calls, each usable on its own:
//
//   - [OpenCorpus] reads a manifest or class-folder corpus and gives it
//     folds when it has none;
//   - [Train] trains one network with a test fold held out and a
//     validation fold for early stopping (never the test fold), with the
//     band statistics of the training windows shared by every set, and
//     writes the best epoch as a float model file; [CrossValidate] does it
//     once per fold and gives mean and standard deviation;
//   - [LoadModel] reads a float or an int8 model file as a [Model]:
//     [Evaluate] and [Timeline] work on either;
//   - [Quantize] calibrates a float model to int8 on a calibration fold,
//     optionally fine-tunes it with quantisation-aware training, checks
//     every accumulator against int32 and compares float and int8 on the
//     test fold;
//   - [Export] writes blob, scheme description, C header, C runtime and C
//     front end as one directory, sealed and read back ([OpenExport]);
//   - [VerifyRoundTrip], [VerifyC], [VerifyCFrontEnd] and [Onchip] check the
//     export against the Go engine: read back, compiled C, C front end, an
//     emulated Cortex-M4;
//   - [Melspec] writes the log-mel matrix and the A-weighted level of a
//     recording, and [Timeline] the classes of a recording window by
//     window; both read recordings of any length block by block in
//     bounded memory;
//   - [Demo] runs all of it on the synthetic timber-yard corpus.
//
// Long calls report progress to a [Reporter] (nil: none); they never print.
//
// # Folds
//
// Folds are named by their labels as the manifest writes them ("1", "dev";
// see datasets.Corpus.FoldLabels). A model file records the labels of its
// test and validation folds, and evaluation and quantisation use them
// unless told otherwise.
//
// # Errors
//
// Bad input (a file, a fold label, a setting) is an error naming it;
// errors from the packages below are wrapped and keep their types
// (datasets.ManifestError, nn.FormatError, quant.FormatError, ...).
//
// # Concurrency
//
// A [Model] is not safe for concurrent use; calls that train or load use
// every core through the packages below and are deterministic for a seed.
package pipit
