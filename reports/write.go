package reports

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"path/filepath"

	"lotgate/pipeline"
)

// renderer writes one document for a record; logo may be nil.
type renderer func(w io.Writer, rec *pipeline.Record, logo []byte) error

// formats maps a format name (as in the pipeline's report block) to its
// file extension and renderer. Adding a report is one entry here.
var formats = map[string]struct {
	ext    string
	render renderer
}{
	"json": {".json", func(w io.Writer, rec *pipeline.Record, _ []byte) error {
		b, err := rec.Marshal()
		if err == nil {
			_, err = w.Write(b)
		}
		return err
	}},
	"xlsx": {".xlsx", func(w io.Writer, rec *pipeline.Record, _ []byte) error { return WriteXLSX(w, rec) }},
	"pdf":  {".pdf", WritePDF},
}

// Output is one document written for a record.
type Output struct {
	Format  string `json:"format"`
	Path    string `json:"path"`
	SHA256  string `json:"sha256"`
	Changed bool   `json:"-"`
}

// Render returns the bytes of one format for the record.
func Render(format string, rec *pipeline.Record, logo []byte) ([]byte, error) {
	f, ok := formats[format]
	if !ok {
		return nil, fmt.Errorf("no report format %q", format)
	}
	var b bytes.Buffer
	if err := f.render(&b, rec, logo); err != nil {
		return nil, fmt.Errorf("%s report: %w", format, err)
	}
	return b.Bytes(), nil
}

// WriteAll renders every format the record's report settings name and
// writes each atomically as dir/stem.EXT, the JSON record first. Every
// document is rendered before anything is written, so a rendering error
// leaves no file behind. With replace false an existing file with other
// content is refused (ErrExists).
func WriteAll(dir, stem string, rec *pipeline.Record, logo []byte, replace bool) ([]Output, error) {
	type doc struct {
		format, path string
		data         []byte
	}
	var docs []doc
	for _, name := range rec.Report.Formats {
		data, err := Render(name, rec, logo)
		if err != nil {
			return nil, err
		}
		docs = append(docs, doc{name, filepath.Join(dir, stem+formats[name].ext), data})
	}
	var out []Output
	for _, d := range docs {
		changed, err := WriteAtomic(d.path, d.data, replace)
		if err != nil {
			return out, err
		}
		sum := sha256.Sum256(d.data)
		out = append(out, Output{Format: d.format, Path: d.path, SHA256: hex.EncodeToString(sum[:]), Changed: changed})
	}
	return out, nil
}
