// Package features turns recordings into the log-mel frames pipit's
// networks read: WAV decoding, mono mix, band-limited resampling, framing,
// windows, real FFT, mel filterbanks, log compression, a batch and a
// streaming extractor, per-band normalisation statistics, and the IEC
// 61672-1 A and C frequency weightings with an indicative A-weighted
// digital level (not a sound pressure level: pipit is not a sound level
// meter; where levels bear on noise exposure, a certified instrument and
// local regulations and licensed practice decide).
//
// features computes log-mel features for training and for reproducing them
// on a device; it is not a general DSP library, and it knows nothing of
// networks or labels.
//
// # Overview
//
// A [Config] describes the whole front end; its doc comment is the
// normative definition a device implements. [NewExtractor] builds the
// tables for one Config; [Extractor.Compute] returns a (Bands, Frames)
// matrix and [Stream] produces the same frames from PCM chunks of any size.
// [ReadWAVFile] decodes 8/16/24/32-bit integer and 32-bit float WAV files
// (plain or WAVE_FORMAT_EXTENSIBLE) and mixes them to mono.
//
// # Conventions
//
//   - Samples are float32 at full scale ±1. Integer PCM is scaled by
//     2^-(bits-1); 8-bit PCM is unsigned with offset 128.
//   - Windows: Hann or Hamming (0.54/0.46), periodic ("DFT-even", the
//     default) or symmetric.
//   - The DFT is unnormalised, X[k] = Σ x[n]·e^(-2πikn/N), computed by
//     gonum.org/v1/gonum/dsp/fourier; the spectrum is |X|² (power, the
//     default) or |X|.
//   - Mel scales: HTK 2595·log10(1+f/700) (the default) or Slaney's
//     Auditory Toolbox scale; triangles are linear in Hz between mel-spaced
//     edges, peak 1, optionally area-normalised to unit area in Hz.
//   - Log: natural log with a floor, or dB (10·log10) with a floor and a
//     per-frame floor a fixed number of dB below the frame's loudest band.
//   - Resampling: Kaiser-windowed sinc, passband to 0.9 of the lower
//     Nyquist frequency, designed for 90 dB stopband (measured: ≥ 88 dB
//     alias rejection and ≤ 0.001 dB passband ripple for every pair of the
//     rates 8–48 kHz; see resample_test.go).
//
// # Shapes and layout
//
// A log-mel matrix is row-major (M, F): band m of frame t is element
// m·F + t, so it is directly the (H, W) plane of a channels-last network
// input with H = bands and W = frames. [Stream.Push] appends frames one
// after another (frame-major: F, M), the order in which a device produces
// them.
//
// # Errors
//
// Malformed WAV files give a *[WAVError] naming the file and the byte
// offset; unsupported encodings wrap [ErrUnsupportedFormat]; invalid
// settings wrap [ErrBadConfig]. No input makes the package panic; panics
// are reserved for wrong slice lengths passed to the allocation-free
// per-frame methods, as documented on each.
//
// # Concurrency
//
// [Resampler] is safe for concurrent use. [Extractor] and [Stream] hold
// work buffers and are not: use one per goroutine.
package features
