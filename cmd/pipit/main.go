// Command pipit takes labelled sound recordings to a verified int8
// classifier for a microcontroller. Run "pipit help" for the commands.
package main

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/spf13/cobra"
)

func main() {
	stderr := newConsole(os.Stderr) // an error never lands on a live status line
	if err := newRootCmd(os.Stdout, stderr).Execute(); err != nil {
		msg := err.Error()
		if !strings.HasPrefix(msg, "pipit: ") { // library errors already say where they come from
			msg = "pipit: " + msg
		}
		fmt.Fprintln(stderr, msg)
		os.Exit(1)
	}
}

// newRootCmd builds the command tree; stdout and stderr are parameters so
// tests can run commands in-process.
func newRootCmd(stdout, stderr io.Writer) *cobra.Command {
	stderr = newConsole(stderr)
	root := &cobra.Command{
		Use:           "pipit",
		Short:         "From labelled sound recordings to a verified int8 classifier for a microcontroller",
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.AddCommand(newMelspecCmd(), newBudgetCmd(), newSynthCmd(), newTrainCmd(), newEvalCmd(), newQuantizeCmd(), newExportCmd(), newTimelineCmd(), newLogbookCmd(), newDemoCmd(), newOnchipCmd(), newSweepCmd())
	return root
}

// printJSON writes v as indented JSON to w.
func printJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}
