package logbook_test

import (
	"fmt"

	"github.com/pipit-audio/pipit/logbook"
)

// Score a detected event list against a reference, as a test of a
// monitor's logbook does.
func ExampleScoreEvents() {
	ref := []logbook.Span{{StartSec: 0, EndSec: 2, Class: "saw"}, {StartSec: 3, EndSec: 5, Class: "alarm"}}
	det := []logbook.Span{{StartSec: 0.1, EndSec: 2, Class: "saw"}, {StartSec: 3.6, EndSec: 5, Class: "alarm"}}
	e := logbook.ScoreEvents(ref, det, 0.5)
	s := logbook.ScoreSegments(ref, det, 1, 5)
	fmt.Printf("events: F1 %.2f; segments: F1 %.2f\n", e.F1, s.F1)
	// Output:
	// events: F1 0.50; segments: F1 1.00
}
