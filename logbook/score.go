package logbook

import (
	"math"
	"sort"
)

// Scores of a detected event list against a reference, after A. Mesaros,
// T. Heittola and T. Virtanen, "Metrics for polyphonic sound event
// detection", Applied Sciences 6(6):162, 2016.

// EventScore is the event-based score of Mesaros et al. (2016): a
// detected event is a true positive when its onset lies within the onset
// tolerance of a reference event of the same class that no other detected
// event has matched; offsets are not compared (the onset-only variant).
// Precision, recall and F1 are computed from the totals (micro average).
type EventScore struct {
	OnsetTolSec       float64 `json:"onset_tolerance_s"`
	TP, FP, FN        int
	Precision, Recall float64
	F1                float64
	ReferenceEvents   int   `json:"reference_events"`
	DetectedEvents    int   `json:"detected_events"`
	Matches           []int `json:"-"` // for each detected event, the index of its reference (−1: none)
}

// ScoreEvents matches detected events to reference events. Matching is
// greedy: detected events in order of onset, each to the unmatched
// reference of its class with the nearest onset within onsetTolSec.
func ScoreEvents(ref, det []Span, onsetTolSec float64) EventScore {
	s := EventScore{OnsetTolSec: onsetTolSec, ReferenceEvents: len(ref), DetectedEvents: len(det)}
	used := make([]bool, len(ref))
	order := make([]int, len(det))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return det[order[a]].StartSec < det[order[b]].StartSec })
	s.Matches = make([]int, len(det))
	for _, i := range order {
		d := det[i]
		best, bestD := -1, math.Inf(1)
		for j, r := range ref {
			if used[j] || r.Class != d.Class {
				continue
			}
			if dist := math.Abs(r.StartSec - d.StartSec); dist <= onsetTolSec && dist < bestD {
				best, bestD = j, dist
			}
		}
		s.Matches[i] = best
		if best >= 0 {
			used[best] = true
			s.TP++
		} else {
			s.FP++
		}
	}
	s.FN = len(ref) - s.TP
	s.Precision, s.Recall, s.F1 = prf(s.TP, s.FP, s.FN)
	return s
}

// SegmentScore is the segment-based score of Mesaros et al. (2016): the
// time line is cut into segments of SegmentSec; in each segment a class is
// active in the reference or the detection when any of its events overlaps
// the segment. Per segment TP, FP and FN count classes active in both, in
// the detection only, and in the reference only; precision, recall and F1
// come from the totals, and the error rate is ER = (S + D + I) / N with
// S = min(FN, FP), D = max(0, FN − FP), I = max(0, FP − FN) per segment and
// N the active reference classes, each summed over the segments.
type SegmentScore struct {
	SegmentSec        float64 `json:"segment_s"`
	Segments          int
	TP, FP, FN        int
	Precision, Recall float64
	F1                float64
	ErrorRate         float64
}

// ScoreSegments scores det against ref over [0, seconds).
func ScoreSegments(ref, det []Span, segmentSec, seconds float64) SegmentScore {
	n := int(math.Ceil(seconds/segmentSec - 1e-9))
	s := SegmentScore{SegmentSec: segmentSec, Segments: n}
	active := func(spans []Span) []map[string]bool {
		a := make([]map[string]bool, n)
		for k := range a {
			a[k] = map[string]bool{}
		}
		for _, sp := range spans {
			if !(sp.EndSec > sp.StartSec) {
				continue
			}
			k0 := max(0, int(math.Floor(sp.StartSec/segmentSec)))
			k1 := min(n-1, int(math.Ceil(sp.EndSec/segmentSec))-1)
			for k := k0; k <= k1; k++ {
				a[k][sp.Class] = true
			}
		}
		return a
	}
	ra, da := active(ref), active(det)
	var subs, dels, ins, nref int
	for k := 0; k < n; k++ {
		tp, fp, fn := 0, 0, 0
		for c := range da[k] {
			if ra[k][c] {
				tp++
			} else {
				fp++
			}
		}
		for c := range ra[k] {
			if !da[k][c] {
				fn++
			}
		}
		s.TP, s.FP, s.FN = s.TP+tp, s.FP+fp, s.FN+fn
		subs += min(fn, fp)
		dels += max(0, fn-fp)
		ins += max(0, fp-fn)
		nref += len(ra[k])
	}
	s.Precision, s.Recall, s.F1 = prf(s.TP, s.FP, s.FN)
	if nref > 0 {
		s.ErrorRate = float64(subs+dels+ins) / float64(nref)
	}
	return s
}

func prf(tp, fp, fn int) (p, r, f float64) {
	if tp+fp > 0 {
		p = float64(tp) / float64(tp+fp)
	}
	if tp+fn > 0 {
		r = float64(tp) / float64(tp+fn)
	}
	if p+r > 0 {
		f = 2 * p * r / (p + r)
	}
	return p, r, f
}

// EventSpans returns the logbook's events as spans for scoring.
func (lb *Logbook) EventSpans() []Span {
	out := make([]Span, len(lb.Events))
	for i, e := range lb.Events {
		out[i] = Span{e.StartSec, e.EndSec, e.Class}
	}
	return out
}
