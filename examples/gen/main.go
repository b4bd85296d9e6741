// Command gen writes the demo data files of the invented scenario into
// examples/data. Run it from the repository root: go run ./examples/gen
package main

import (
	"fmt"
	"os"
	"path/filepath"

	"lotgate/examples/synth"
)

func main() {
	dir := filepath.Join("examples", "data")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	logo := filepath.Join("examples", "okkerby-logo.png")
	if err := os.WriteFile(logo, synth.Logo(160), 0o644); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	fmt.Println("wrote", logo)
	for _, c := range synth.Demo() {
		path := filepath.Join(dir, c.File)
		if err := os.WriteFile(path, c.Render(), 0o644); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		fmt.Println("wrote", path)
	}
}
