package reports

import (
	"path/filepath"
	"strings"

	"lotgate/pipeline"
)

// RecordName is the file name of the record for an input file: its base name
// with the extension replaced by .json.
func RecordName(input string) string {
	base := filepath.Base(input)
	return strings.TrimSuffix(base, filepath.Ext(base)) + ".json"
}

// WriteJSON writes the record into dir atomically and returns its path.
func WriteJSON(dir string, rec *pipeline.Record, replace bool) (path string, changed bool, err error) {
	data, err := rec.Marshal()
	if err != nil {
		return "", false, err
	}
	path = filepath.Join(dir, RecordName(rec.Provenance.InputFile))
	changed, err = WriteAtomic(path, data, replace)
	return path, changed, err
}
