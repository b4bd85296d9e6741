package reports

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"path/filepath"

	"lotgate/pipeline/batch"
)

// LotFormats are the documents written for every lot, the lot record
// first: the record, the lot workbook and the lot summary PDF.
var LotFormats = []string{"json", "xlsx", "pdf"}

// lotRenderers maps a lot format to its file extension and renderer.
var lotRenderers = map[string]struct {
	ext    string
	render func(w io.Writer, lot *batch.Lot, logo []byte) error
}{
	"json": {".json", func(w io.Writer, lot *batch.Lot, _ []byte) error {
		b, err := lot.Marshal()
		if err == nil {
			_, err = w.Write(b)
		}
		return err
	}},
	"xlsx": {".xlsx", func(w io.Writer, lot *batch.Lot, _ []byte) error { return WriteLotXLSX(w, lot) }},
	"pdf":  {".pdf", WriteLotPDF},
}

// RenderLot returns the bytes of one format of a lot record.
func RenderLot(format string, lot *batch.Lot, logo []byte) ([]byte, error) {
	f, ok := lotRenderers[format]
	if !ok {
		return nil, fmt.Errorf("no lot document format %q", format)
	}
	if lot == nil {
		return nil, errors.New("no lot record to render")
	}
	var b bytes.Buffer
	if err := f.render(&b, lot, logo); err != nil {
		return nil, fmt.Errorf("lot %s: %w", format, err)
	}
	return b.Bytes(), nil
}

// WriteLot renders every lot document and writes each atomically as
// dir/lot-LOT.EXT, the record first; nothing is written when a rendering
// fails. With replace false an existing file with other content is
// refused (ErrExists).
func WriteLot(dir string, lot *batch.Lot, logo []byte, replace bool) ([]Output, error) {
	if lot == nil {
		return nil, errors.New("no lot record to write")
	}
	stem := batch.LotStem(lot.Lot)
	datas := make([][]byte, len(LotFormats))
	for i, name := range LotFormats {
		data, err := RenderLot(name, lot, logo)
		if err != nil {
			return nil, err
		}
		datas[i] = data
	}
	var out []Output
	for i, name := range LotFormats {
		path := filepath.Join(dir, stem+lotRenderers[name].ext)
		changed, err := WriteAtomic(path, datas[i], replace)
		if err != nil {
			return out, err
		}
		sum := sha256.Sum256(datas[i])
		out = append(out, Output{Format: name, Path: path, SHA256: hex.EncodeToString(sum[:]), Changed: changed})
	}
	return out, nil
}

// lotDigest is the SHA-256 of the lot record's JSON, the bytes lotgate
// writes for it.
func lotDigest(lot *batch.Lot) (string, error) {
	b, err := lot.Marshal()
	if err != nil {
		return "", fmt.Errorf("encoding the lot record for its digest: %w", err)
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}
