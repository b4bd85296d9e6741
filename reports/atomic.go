// Package reports renders lotgate records: the JSON record itself, and (in
// later formats) workbooks and certificates. Reports never recompute a
// number; they show what the record holds.
package reports

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// ErrExists is returned when an output file exists with other content and
// replacing was not allowed.
var ErrExists = errors.New("exists with different content")

// WriteAtomic writes data to path so that path is either absent, its old
// content, or the whole new content, never a part: a temporary file in the
// same folder is written, synced and renamed over path, and the folder is
// synced. With replace false an existing file with other content is refused
// (ErrExists); an existing file with the same content is left as it is.
// It reports whether path now holds new content.
func WriteAtomic(path string, data []byte, replace bool) (changed bool, err error) {
	if old, err := os.ReadFile(path); err == nil {
		if bytes.Equal(old, data) {
			return false, nil
		}
		if !replace {
			return false, fmt.Errorf("%s %w (use --replace to overwrite)", path, ErrExists)
		}
	}
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	tmp, err := os.CreateTemp(dir, "."+base+".*.tmp")
	if err != nil {
		return false, err
	}
	defer func() {
		if err != nil {
			os.Remove(tmp.Name())
		}
	}()
	if _, err = tmp.Write(data); err != nil {
		tmp.Close()
		return false, err
	}
	if err = tmp.Chmod(0o644); err != nil {
		tmp.Close()
		return false, err
	}
	if err = tmp.Sync(); err != nil {
		tmp.Close()
		return false, err
	}
	if err = tmp.Close(); err != nil {
		return false, err
	}
	if err = os.Rename(tmp.Name(), path); err != nil {
		return false, err
	}
	if d, derr := os.Open(dir); derr == nil {
		_ = d.Sync() // best effort: not every file system can sync a folder
		d.Close()
	}
	return true, nil
}
