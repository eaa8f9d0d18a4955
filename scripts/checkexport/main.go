// Command checkexport reads pipit export directories back as pipit does
// (pipit.OpenExport: blob, scheme and seal, every header and runtime file)
// and prints each one's seal. It exits with status 1, naming the
// directory and the problem, at the first that is not one complete
// export. scripts/crash_export.sh uses it.
//
//	go run ./scripts/checkexport DIR...
package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"github.com/pipit-audio/pipit"
)

func main() {
	if len(os.Args) < 2 {
		fmt.Fprintln(os.Stderr, "usage: checkexport DIR...")
		os.Exit(2)
	}
	for _, dir := range os.Args[1:] {
		if _, err := pipit.OpenExport(dir); err != nil {
			fmt.Fprintf(os.Stderr, "checkexport: %s: %v\n", dir, err)
			os.Exit(1)
		}
		var s struct {
			Seal string `json:"seal"`
		}
		b, err := os.ReadFile(filepath.Join(dir, pipit.SchemeFile))
		if err == nil {
			err = json.Unmarshal(b, &s)
		}
		if err != nil {
			fmt.Fprintf(os.Stderr, "checkexport: %s: %v\n", dir, err)
			os.Exit(1)
		}
		fmt.Printf("%s %s\n", s.Seal, dir)
	}
}
