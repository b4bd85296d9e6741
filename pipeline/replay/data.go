package replay

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"lotgate/pipeline"
	"lotgate/pipeline/bundle"
)

// ReadRecord reads a record file.
func ReadRecord(path string) (*pipeline.Record, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var rec pipeline.Record
	if err := json.Unmarshal(data, &rec); err != nil {
		return nil, fmt.Errorf("%s: not a lotgate record: %v", path, err)
	}
	if rec.Schema != pipeline.Schema {
		return nil, fmt.Errorf("%s: schema %q is not %q", path, rec.Schema, pipeline.Schema)
	}
	if rec.Provenance.InputSHA256 == "" {
		return nil, fmt.Errorf("%s: the record names no input digest, so its raw data cannot be verified", path)
	}
	return &rec, nil
}

// FileSHA256 returns the hex SHA-256 of a file's bytes.
func FileSHA256(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("%s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// VerifyData checks that the data file at path is the record's raw data:
// its SHA-256 must be the record's input_sha256.
func VerifyData(path string, rec *pipeline.Record) error {
	sum, err := FileSHA256(path)
	if err != nil {
		return err
	}
	return checkDigest(path, sum, rec)
}

func checkDigest(path, sum string, rec *pipeline.Record) error {
	if want := rec.Provenance.InputSHA256; sum != want {
		return fmt.Errorf("%s has sha256 %s, but the record was made from %s with sha256 %s; a replay runs only on the record's own raw data",
			path, sum, rec.Provenance.InputFile, want)
	}
	return nil
}

// Finder finds the raw data of records by their digest. It looks in the
// given folders, or else in the record's folder and its input subfolder:
// first for a file with the record's input file name, then at every other
// file there (a renamed copy is found too). It remembers the digests it
// computed, so that many records in one folder hash each file once.
type Finder struct {
	// Dirs, when not empty, are the only folders searched.
	Dirs   []string
	hashes map[string]string // path → sha256
}

// Find returns the path of the record's raw data file.
func (f *Finder) Find(recordPath string, rec *pipeline.Record) (string, error) {
	dirs := f.Dirs
	if len(dirs) == 0 {
		d := filepath.Dir(recordPath)
		dirs = []string{d, filepath.Join(d, "input")}
	}
	want, name := rec.Provenance.InputSHA256, filepath.Base(rec.Provenance.InputFile)
	var changed []string
	for _, d := range dirs {
		p := filepath.Join(d, name)
		if st, err := os.Stat(p); err == nil && st.Mode().IsRegular() {
			if f.digest(p) == want {
				return p, nil
			}
			changed = append(changed, p)
		}
	}
	for _, d := range dirs {
		entries, err := os.ReadDir(d) // sorted by name: the first match wins
		if err != nil {
			continue
		}
		for _, e := range entries {
			if !e.Type().IsRegular() || skipped(e.Name()) {
				continue
			}
			if p := filepath.Join(d, e.Name()); f.digest(p) == want {
				return p, nil
			}
		}
	}
	msg := fmt.Sprintf("the raw data of %s (%s, sha256 %s) is not in %s", filepath.Base(recordPath), name, want, strings.Join(dirs, " or "))
	if len(changed) > 0 {
		msg += fmt.Sprintf("; %s is there but its bytes differ from the record's", strings.Join(changed, ", "))
	}
	return "", fmt.Errorf("%s: give the data file, or --data DIR", msg)
}

func (f *Finder) digest(path string) string {
	if f.hashes == nil {
		f.hashes = map[string]string{}
	}
	if s, ok := f.hashes[path]; ok {
		return s
	}
	s, _ := FileSHA256(path) // an unreadable file matches nothing
	f.hashes[path] = s
	return s
}

// skipped tells the files lotgate writes, which are never raw data.
func skipped(name string) bool {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".json", ".xlsx", ".pdf", bundle.Ext, ".hcl", ".tmp":
		return true
	}
	return false
}
