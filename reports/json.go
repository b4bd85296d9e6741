package reports

import (
	"path/filepath"
	"strings"
)

// Stem is the base name of an input file without its extension: the name
// its documents are written under (stem.json, stem.xlsx, stem.pdf).
func Stem(input string) string {
	base := filepath.Base(input)
	return strings.TrimSuffix(base, filepath.Ext(base))
}
