package pipit

// Reporter receives the progress of a long call. The calls of this package
// never print; a command line shows these reports, a script may ignore
// them (pass nil).
type Reporter interface {
	// Stage starts a stage of work ("load train", "epoch 3/40").
	Stage(label string)
	// Step reports done of total units of the current stage, with a note
	// (may be empty).
	Step(done, total int, unit, note string)
	// Done ends the current stage with a closing note.
	Done(note string)
	// Note reports a line of its own (a heading, a result of a check).
	Note(line string)
	// Warn reports a problem that did not stop the call, such as a clip
	// skipped as unreadable.
	Warn(err error)
}

// quiet is the Reporter of a nil Reporter.
type quiet struct{}

func (quiet) Stage(string)                  {}
func (quiet) Step(int, int, string, string) {}
func (quiet) Done(string)                   {}
func (quiet) Note(string)                   {}
func (quiet) Warn(error)                    {}

func orQuiet(r Reporter) Reporter {
	if r == nil {
		return quiet{}
	}
	return r
}
