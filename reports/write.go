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

// renderer writes one document for a record; logo may be nil, and digest
// gives the SHA-256 of the record's JSON bytes for documents that show it.
type renderer func(w io.Writer, rec *pipeline.Record, logo []byte, digest digest) error

// digest yields the SHA-256 (hex) of the record's JSON bytes.
type digest func() (string, error)

// digestOf is the digest of JSON bytes already encoded.
func digestOf(js []byte) digest {
	sum := sha256.Sum256(js)
	s := hex.EncodeToString(sum[:])
	return func() (string, error) { return s, nil }
}

// digestLater encodes the record in the background (for a long trace that
// takes as long as laying out a document) and waits for it when asked.
func digestLater(rec *pipeline.Record) digest {
	type result struct {
		js  []byte
		err error
	}
	ch := make(chan result, 1)
	go func() {
		js, err := rec.Marshal()
		ch <- result{js, err}
	}()
	return func() (string, error) {
		r := <-ch
		if r.err != nil {
			return "", r.err
		}
		return digestOf(r.js)()
	}
}

// formats maps a format name (as in the pipeline's report block) to its
// file extension and renderer. Adding a report is one entry here.
var formats = map[string]struct {
	ext    string
	render renderer
}{
	"json": {".json", nil}, // the record's own bytes: RenderAll encodes them once
	"xlsx": {".xlsx", func(w io.Writer, rec *pipeline.Record, _ []byte, d digest) error { return writeXLSX(w, rec, d) }},
	"pdf":  {".pdf", writePDF},
}

// Output is one document written for a record.
type Output struct {
	Format  string `json:"format"`
	Path    string `json:"path"`
	SHA256  string `json:"sha256"`
	Changed bool   `json:"-"`
}

// RenderAll returns the bytes of each named format for the record, in
// order. The record is encoded once: its JSON is the "json" document and its
// digest is what the other documents show.
func RenderAll(rec *pipeline.Record, logo []byte, names []string) ([][]byte, error) {
	js, err := rec.Marshal()
	if err != nil {
		return nil, fmt.Errorf("json report: %w", err)
	}
	d := digestOf(js)
	out := make([][]byte, len(names))
	for i, name := range names {
		f, ok := formats[name]
		switch {
		case !ok:
			return nil, fmt.Errorf("no report format %q", name)
		case f.render == nil:
			out[i] = js
			continue
		}
		var b bytes.Buffer
		if err := f.render(&b, rec, logo, d); err != nil {
			return nil, fmt.Errorf("%s report: %w", name, err)
		}
		out[i] = b.Bytes()
	}
	return out, nil
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
	datas, err := RenderAll(rec, logo, rec.Report.Formats)
	if err != nil {
		return nil, err
	}
	var docs []doc
	for i, name := range rec.Report.Formats {
		docs = append(docs, doc{name, filepath.Join(dir, stem+formats[name].ext), datas[i]})
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
