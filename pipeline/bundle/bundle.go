// Package bundle freezes a pipeline version into one file and loads it back
// verified: the pipeline, every file it names and a manifest with the SHA-256
// of each, stored in a zip archive (extension .lotgate) whose own SHA-256
// names it and is written into every record made from it.
//
// The archive's bytes depend only on the files and the freeze time: entries
// in a fixed order (manifest.json, the pipeline, the files it names in the
// order it names them), stored uncompressed, each with the freeze time as its
// modification time and mode 0644, and the manifest's digest as the archive
// comment. Loading checks every entry against the manifest and the manifest
// against the comment, and refuses, naming the entry, anything that differs,
// is missing or is extra; the pipeline is then loaded from the verified bytes
// alone, so a bundle never reads a file from outside itself.
package bundle

import (
	"archive/zip"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"lotgate/pipeline"
)

// Ext is the file name extension of a bundle.
const Ext = ".lotgate"

// Schema names the bundle format; it changes only with an incompatible change.
const Schema = "lotgate.bundle/v1"

// ManifestName is the manifest's entry name inside the archive.
const ManifestName = "manifest.json"

// MaxSize is the largest bundle file that is read (256 MiB).
const MaxSize = 256 << 20

// commentPrefix starts the archive comment, which ends with the manifest's
// SHA-256.
const commentPrefix = Schema + " manifest.json sha256 "

// Manifest describes a bundle's contents.
type Manifest struct {
	Schema         string       `json:"schema"`
	Pipeline       PipelineInfo `json:"pipeline"`
	LotgateVersion string       `json:"lotgate_version"`
	// FrozenAt is RFC 3339 UTC; it honours SOURCE_DATE_EPOCH.
	FrozenAt string `json:"frozen_at"`
	// Files lists every entry but the manifest, in archive order: the
	// pipeline first, then the files it names.
	Files []File `json:"files"`
}

// PipelineInfo names the frozen method version.
type PipelineInfo struct {
	Name        string `json:"name"`
	Revision    int    `json:"revision"`
	Description string `json:"description"`
	// File is the pipeline's entry name.
	File string `json:"file"`
}

// File is one entry of the bundle with the size and SHA-256 of its bytes.
type File struct {
	Path   string `json:"path"`
	Size   int64  `json:"size"`
	SHA256 string `json:"sha256"`
}

// Bundle is a verified bundle: its manifest, its digest and the pipeline
// loaded from its contents.
type Bundle struct {
	Manifest Manifest
	// Digest is the SHA-256 of the bundle file, hex encoded; it is also the
	// loaded pipeline's Bundle.
	Digest   string
	Pipeline *pipeline.Pipeline
	files    map[string][]byte
}

// File returns the verified bytes of the entry name (a path from the
// manifest's file list).
func (b *Bundle) File(name string) ([]byte, bool) {
	data, ok := b.files[name]
	return data, ok
}

// IsBundle tells whether data starts like a zip archive (a bundle) rather
// than a pipeline's text: with a local file header's signature, or an
// empty archive's end record's.
func IsBundle(data []byte) bool {
	return bytes.HasPrefix(data, []byte("PK\x03\x04")) || bytes.HasPrefix(data, []byte("PK\x05\x06"))
}

// Load loads a pipeline from a plain pipeline file or from a bundle, told
// apart by the zip signature at the start of the file, not by its name.
// A bundle is verified first and the pipeline's Bundle is set to its digest.
func Load(path string) (*pipeline.Pipeline, error) {
	bundled, err := sniff(path)
	if err != nil {
		return nil, err
	}
	if !bundled {
		return pipeline.Load(path)
	}
	b, err := Open(path)
	if err != nil {
		return nil, err
	}
	return b.Pipeline, nil
}

func sniff(path string) (bool, error) {
	f, err := os.Open(path)
	if err != nil {
		return false, fmt.Errorf("pipeline %s: %w", path, err)
	}
	defer f.Close()
	head := make([]byte, 4)
	n, _ := io.ReadFull(f, head)
	return IsBundle(head[:n]), nil
}

// OpenAny opens a bundle, or freezes a plain pipeline file in memory so
// that it can be handled like one; its Digest and its pipeline's Bundle are
// then "", since no bundle file names it.
func OpenAny(path string) (*Bundle, error) {
	bundled, err := sniff(path)
	if err != nil {
		return nil, err
	}
	if bundled {
		return Open(path)
	}
	data, err := Freeze(path, time.Unix(0, 0))
	if err != nil {
		return nil, err
	}
	b, err := Read(data, path)
	if err != nil {
		return nil, err
	}
	b.Digest, b.Pipeline.Bundle = "", ""
	return b, nil
}

// Open reads and verifies the bundle file at path.
func Open(path string) (*Bundle, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("bundle %s: %w", path, err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxSize+1))
	if err != nil {
		return nil, fmt.Errorf("bundle %s: %w", path, err)
	}
	if len(data) > MaxSize {
		return nil, fmt.Errorf("bundle %s: larger than %d MiB; a bundle holds a pipeline and its few files", path, MaxSize>>20)
	}
	return Read(data, path)
}

// Read verifies a bundle held in memory; name is used in errors. Every
// entry must match the manifest (size and SHA-256), the manifest must match
// the archive comment, no entry may be missing, extra or repeated, and the
// pipeline must load from the bundle's files alone and name exactly the
// files that the manifest lists.
func Read(data []byte, name string) (*Bundle, error) {
	fail := func(format string, args ...any) error {
		return fmt.Errorf("bundle %s: %s", name, fmt.Sprintf(format, args...))
	}
	if !IsBundle(data) {
		return nil, fail("not a bundle (no zip signature at the start); give a pipeline file or a %s bundle", Ext)
	}
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		return nil, fail("not a readable zip archive: %v", err)
	}
	entries := map[string]*zip.File{}
	var order []string
	for _, zf := range zr.File {
		if _, dup := entries[zf.Name]; dup {
			return nil, fail("entry %s appears twice", zf.Name)
		}
		entries[zf.Name] = zf
		order = append(order, zf.Name)
	}
	mf, ok := entries[ManifestName]
	if !ok {
		return nil, fail("%s is missing", ManifestName)
	}
	mdata, err := readEntry(mf, 1<<20)
	if err != nil {
		return nil, fail("%s: %v", ManifestName, err)
	}
	msum := sha256.Sum256(mdata)
	if want := commentPrefix + hex.EncodeToString(msum[:]); zr.Comment != want {
		return nil, fail("%s does not match the digest in the archive comment (the manifest or the comment was changed after freezing)", ManifestName)
	}
	m, err := parseManifest(mdata)
	if err != nil {
		return nil, fail("%s: %v", ManifestName, err)
	}
	listed := map[string]File{}
	for _, f := range m.Files {
		if f.Path == ManifestName || !fs.ValidPath(f.Path) || f.Path == "." {
			return nil, fail("%s lists an invalid file name %q", ManifestName, f.Path)
		}
		if _, dup := listed[f.Path]; dup {
			return nil, fail("%s lists %s twice", ManifestName, f.Path)
		}
		listed[f.Path] = f
	}
	for _, n := range order {
		if _, ok := listed[n]; !ok && n != ManifestName {
			return nil, fail("extra entry %s is not listed in %s", n, ManifestName)
		}
	}
	b := &Bundle{Manifest: *m, files: map[string][]byte{}}
	for _, f := range m.Files {
		zf, ok := entries[f.Path]
		if !ok {
			return nil, fail("%s is listed in %s but missing from the archive", f.Path, ManifestName)
		}
		content, err := readEntry(zf, f.Size)
		if err != nil {
			return nil, fail("%s: %v", f.Path, err)
		}
		sum := sha256.Sum256(content)
		if got := hex.EncodeToString(sum[:]); int64(len(content)) != f.Size || got != f.SHA256 {
			return nil, fail("%s differs from %s: %d bytes with sha256 %s, listed as %d bytes with sha256 %s",
				f.Path, ManifestName, len(content), got, f.Size, f.SHA256)
		}
		b.files[f.Path] = content
	}
	p, err := pipeline.LoadFS(memFS(b.files), m.Pipeline.File)
	if err != nil {
		return nil, fmt.Errorf("bundle %s: %w", name, err)
	}
	if p.Name != m.Pipeline.Name || p.Revision != m.Pipeline.Revision || p.Description != m.Pipeline.Description {
		return nil, fail("%s describes pipeline %q revision %d (%q), but %s declares %q revision %d (%q)",
			ManifestName, m.Pipeline.Name, m.Pipeline.Revision, m.Pipeline.Description, m.Pipeline.File, p.Name, p.Revision, p.Description)
	}
	used := map[string]bool{m.Pipeline.File: true}
	for _, ref := range p.Refs {
		used[refPath(m.Pipeline.File, ref)] = true
	}
	for _, f := range m.Files {
		if !used[f.Path] {
			return nil, fail("%s lists %s, which the pipeline does not use", ManifestName, f.Path)
		}
	}
	sum := sha256.Sum256(data)
	b.Digest = hex.EncodeToString(sum[:])
	p.Bundle = b.Digest
	b.Pipeline = p
	return b, nil
}

// readEntry reads one entry, refusing more than size bytes (the archive's
// stated sizes are not trusted). A checksum error names no entry by
// itself; the caller adds the name.
func readEntry(zf *zip.File, size int64) ([]byte, error) {
	if size < 0 {
		return nil, errors.New("negative size")
	}
	rc, err := zf.Open()
	if err != nil {
		return nil, err
	}
	defer rc.Close()
	data, err := io.ReadAll(io.LimitReader(rc, size+1))
	if errors.Is(err, zip.ErrChecksum) {
		return nil, errors.New("content does not match its zip checksum (the entry was changed or damaged)")
	}
	if err != nil {
		return nil, err
	}
	if int64(len(data)) > size {
		return nil, fmt.Errorf("longer than the %d bytes listed in %s", size, ManifestName)
	}
	return data, nil
}

func parseManifest(data []byte) (*Manifest, error) {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var m Manifest
	if err := dec.Decode(&m); err != nil {
		return nil, fmt.Errorf("not a valid manifest: %v", err)
	}
	if dec.More() {
		return nil, errors.New("not a valid manifest: text after the JSON object")
	}
	if m.Schema != Schema {
		return nil, fmt.Errorf("schema %q is not %q; this lotgate reads %s bundles", m.Schema, Schema, Schema)
	}
	if _, err := time.Parse(time.RFC3339, m.FrozenAt); err != nil {
		return nil, fmt.Errorf("frozen_at %q is not an RFC 3339 time", m.FrozenAt)
	}
	if len(m.Files) == 0 || m.Files[0].Path != m.Pipeline.File {
		return nil, errors.New("the file list must start with the pipeline file")
	}
	return &m, nil
}

// refPath is the entry name of a file the pipeline at pipe names as ref.
func refPath(pipe, ref string) string { return path.Join(path.Dir(pipe), filepath.ToSlash(ref)) }

// Freeze loads and checks the pipeline at pipelinePath and returns the bytes
// of its bundle, frozen at the time at (pipeline.RunTime gives the usual
// one). The same files and time give the same bytes. Every file the
// pipeline names must be in its folder or below it.
func Freeze(pipelinePath string, at time.Time) ([]byte, error) {
	head, err := sniff(pipelinePath)
	if err != nil {
		return nil, err
	}
	if head {
		return nil, fmt.Errorf("freeze %s: this is already a bundle; freeze the pipeline file it was made from", pipelinePath)
	}
	// Load from the disk first for diagnostics that carry the full path.
	p, err := pipeline.Load(pipelinePath)
	if err != nil {
		return nil, err
	}
	base := filepath.Base(pipelinePath)
	for _, ref := range p.Refs {
		r := filepath.ToSlash(ref)
		clean := path.Clean(r)
		if filepath.IsAbs(ref) || path.IsAbs(r) || clean == ".." || strings.HasPrefix(clean, "../") {
			return nil, fmt.Errorf("freeze %s: the pipeline names %q, outside its folder; a bundle carries only files in the pipeline's folder or below it (copy the file there and name it relatively)", pipelinePath, ref)
		}
		if clean == ManifestName {
			return nil, fmt.Errorf("freeze %s: the pipeline names a file %q; that name is the bundle's manifest, rename the file", pipelinePath, ref)
		}
	}
	// Load again through a file system that remembers what was read, so that
	// the bundle holds exactly the bytes the pipeline was checked with.
	rec := &recordFS{FS: os.DirFS(filepath.Dir(pipelinePath)), read: map[string][]byte{}}
	if p, err = pipeline.LoadFS(rec, base); err != nil {
		return nil, err
	}
	names := []string{base}
	for _, ref := range p.Refs {
		if n := refPath(base, ref); !slices.Contains(names, n) {
			names = append(names, n)
		}
	}
	m := Manifest{
		Schema:         Schema,
		Pipeline:       PipelineInfo{Name: p.Name, Revision: p.Revision, Description: p.Description, File: base},
		LotgateVersion: pipeline.Version,
		FrozenAt:       at.UTC().Format(time.RFC3339),
	}
	for _, n := range names {
		data, ok := rec.read[n]
		if !ok {
			return nil, fmt.Errorf("freeze %s: %s was not read while loading the pipeline", pipelinePath, n)
		}
		sum := sha256.Sum256(data)
		m.Files = append(m.Files, File{Path: n, Size: int64(len(data)), SHA256: hex.EncodeToString(sum[:])})
	}
	var mbuf bytes.Buffer
	enc := json.NewEncoder(&mbuf)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", " ")
	if err := enc.Encode(m); err != nil {
		return nil, err
	}
	mdata := mbuf.Bytes()
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	mod := zipTime(at)
	add := func(name string, data []byte) error {
		h := &zip.FileHeader{Name: name, Method: zip.Store, Modified: mod}
		h.SetMode(0o644)
		w, err := zw.CreateHeader(h)
		if err == nil {
			_, err = w.Write(data)
		}
		return err
	}
	if err := add(ManifestName, mdata); err != nil {
		return nil, err
	}
	for _, n := range names {
		if err := add(n, rec.read[n]); err != nil {
			return nil, err
		}
	}
	msum := sha256.Sum256(mdata)
	if err := zw.SetComment(commentPrefix + hex.EncodeToString(msum[:])); err != nil {
		return nil, err
	}
	if err := zw.Close(); err != nil {
		return nil, err
	}
	// The bundle must load on its own before it is handed out.
	if _, err := Read(buf.Bytes(), base+Ext); err != nil {
		return nil, fmt.Errorf("freeze %s: the bundle does not load on its own: %w", pipelinePath, err)
	}
	return buf.Bytes(), nil
}

// zipTime keeps the entries' time within what a zip's MS-DOS date can hold
// (1980 to 2107); the manifest keeps the exact freeze time.
func zipTime(at time.Time) time.Time {
	lo := time.Date(1980, 1, 1, 0, 0, 0, 0, time.UTC)
	hi := time.Date(2107, 12, 31, 23, 59, 58, 0, time.UTC)
	switch at = at.UTC().Truncate(time.Second); {
	case at.Before(lo):
		return lo
	case at.After(hi):
		return hi
	}
	return at
}

// recordFS remembers the bytes of every file read through ReadFile.
type recordFS struct {
	fs.FS
	read map[string][]byte
}

func (r *recordFS) ReadFile(name string) ([]byte, error) {
	data, err := fs.ReadFile(r.FS, name)
	if err == nil {
		r.read[name] = data
	}
	return data, err
}

// memFS serves the verified contents of a bundle.
type memFS map[string][]byte

func (m memFS) Open(name string) (fs.File, error) {
	data, ok := m[name]
	if !ok || !fs.ValidPath(name) {
		return nil, &fs.PathError{Op: "open", Path: name, Err: fs.ErrNotExist}
	}
	return &memFile{name: name, Reader: bytes.NewReader(data), size: int64(len(data))}, nil
}

func (m memFS) ReadFile(name string) ([]byte, error) {
	data, ok := m[name]
	if !ok || !fs.ValidPath(name) {
		return nil, &fs.PathError{Op: "open", Path: name, Err: fmt.Errorf("%w in the bundle", fs.ErrNotExist)}
	}
	return slices.Clone(data), nil
}

type memFile struct {
	name string
	*bytes.Reader
	size int64
}

func (f *memFile) Stat() (fs.FileInfo, error) { return memInfo{path.Base(f.name), f.size}, nil }
func (f *memFile) Close() error               { return nil }

type memInfo struct {
	name string
	size int64
}

func (i memInfo) Name() string       { return i.name }
func (i memInfo) Size() int64        { return i.size }
func (i memInfo) Mode() fs.FileMode  { return 0o444 }
func (i memInfo) ModTime() time.Time { return time.Time{} }
func (i memInfo) IsDir() bool        { return false }
func (i memInfo) Sys() any           { return nil }
