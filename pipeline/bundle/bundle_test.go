package bundle_test

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"flag"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"lotgate/pipeline"
	"lotgate/pipeline/bundle"
	"lotgate/pipeline/replay"
)

var update = flag.Bool("update", false, "rewrite the bundle fixture and its golden records under testdata")

const (
	demo    = "../../examples/toluene-release.hcl"
	dataDir = "../../examples/data"
	fixture = "testdata/toluene-release-r3" + bundle.Ext
	epoch   = 1796083200 // 2026-12-01T00:00:00Z
)

var at = time.Unix(epoch, 0)

func freezeDemo(t testing.TB) []byte {
	t.Helper()
	data, err := bundle.Freeze(demo, at)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// Freeze → load → process gives the same record as the plain pipeline, byte
// for byte, but for the bundle digest, which is the SHA-256 of the whole
// bundle file.
func TestFreezeLoadProcess(t *testing.T) {
	data := freezeDemo(t)
	// APPNOTE.TXT §4.3.7 (PKWARE zip specification): a local file header
	// starts with the signature 0x04034b50, "PK\x03\x04" (from memory).
	if !bytes.HasPrefix(data, []byte("PK\x03\x04")) {
		t.Fatalf("bundle does not start with a zip local file header: % x", data[:4])
	}
	b, err := bundle.Read(data, "demo"+bundle.Ext)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(data)
	if want := hex.EncodeToString(sum[:]); b.Digest != want || b.Pipeline.Bundle != want {
		t.Errorf("digest %s, pipeline.Bundle %s, want the SHA-256 of the file %s", b.Digest, b.Pipeline.Bundle, want)
	}
	plain, err := pipeline.Load(demo)
	if err != nil {
		t.Fatal(err)
	}
	m := b.Manifest
	if m.Schema != bundle.Schema || m.Pipeline.Name != plain.Name || m.Pipeline.Revision != plain.Revision ||
		m.LotgateVersion != pipeline.Version || m.FrozenAt != "2026-12-01T00:00:00Z" {
		t.Errorf("manifest %+v", m)
	}
	var names []string
	for _, f := range m.Files {
		names = append(names, f.Path)
	}
	if got := strings.Join(names, " "); got != "toluene-release.hcl okkerby-logo.png" {
		t.Errorf("files %q, want the pipeline then its logo", got)
	}
	if m.Files[0].SHA256 != plain.Digest {
		t.Errorf("pipeline digest %s in the manifest, %s loaded", m.Files[0].SHA256, plain.Digest)
	}
	file := filepath.Join(dataDir, "T998-26-1141.csv")
	x, err := plain.ProcessFile(context.Background(), file, at)
	if err != nil {
		t.Fatal(err)
	}
	y, err := b.Pipeline.ProcessFile(context.Background(), file, at)
	if err != nil {
		t.Fatal(err)
	}
	if y.Provenance.BundleSHA256 != b.Digest {
		t.Errorf("record names bundle %q, want %s", y.Provenance.BundleSHA256, b.Digest)
	}
	y.Provenance.BundleSHA256 = ""
	xb, _ := x.Marshal()
	yb, _ := y.Marshal()
	if !bytes.Equal(xb, yb) {
		t.Error("the bundle's record differs from the plain pipeline's beyond the bundle digest")
	}
}

// The same files frozen at the same SOURCE_DATE_EPOCH give the same bytes:
// entries in a fixed order, stored, with the freeze time and mode 0644.
func TestFreezeDeterministic(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", "1796083200")
	var runs [2][]byte
	for i := range runs {
		when, err := pipeline.RunTime()
		if err != nil {
			t.Fatal(err)
		}
		if runs[i], err = bundle.Freeze(demo, when); err != nil {
			t.Fatal(err)
		}
	}
	if !bytes.Equal(runs[0], runs[1]) {
		t.Fatal("two freezes at the same SOURCE_DATE_EPOCH differ")
	}
	zr, err := zip.NewReader(bytes.NewReader(runs[0]), int64(len(runs[0])))
	if err != nil {
		t.Fatal(err)
	}
	want := []string{bundle.ManifestName, "toluene-release.hcl", "okkerby-logo.png"}
	if len(zr.File) != len(want) {
		t.Fatalf("%d entries, want %d", len(zr.File), len(want))
	}
	for i, f := range zr.File {
		if f.Name != want[i] || !f.Modified.Equal(at) || f.Mode() != 0o644 || f.Method != zip.Store {
			t.Errorf("entry %d: %s modified %v mode %v method %d; want %s at %v, 0644, stored",
				i, f.Name, f.Modified, f.Mode(), f.Method, want[i], at)
		}
	}
	later, err := bundle.Freeze(demo, at.Add(time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Equal(later, runs[0]) {
		t.Error("a bundle frozen an hour later has the same bytes")
	}
}

// rewrite makes a new archive from the entries of data, with change applied
// to each entry's name and content (a nil content drops the entry), keeping
// the archive comment.
func rewrite(t *testing.T, data []byte, change func(name string, content []byte) []byte, extra map[string][]byte) []byte {
	t.Helper()
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	add := func(h zip.FileHeader, content []byte) {
		w, err := zw.CreateHeader(&h)
		if err == nil {
			_, err = w.Write(content)
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	for _, f := range zr.File {
		rc, err := f.Open()
		if err != nil {
			t.Fatal(err)
		}
		content, _ := io.ReadAll(rc)
		rc.Close()
		if content = change(f.Name, content); content != nil {
			add(f.FileHeader, content)
		}
	}
	for name, content := range extra {
		add(zip.FileHeader{Name: name, Method: zip.Store}, content)
	}
	if err := zw.SetComment(zr.Comment); err != nil {
		t.Fatal(err)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func flip(b []byte, i int) []byte {
	b = bytes.Clone(b)
	b[i] ^= 0x01
	return b
}

// A one-byte change to any file in a bundle, the manifest included, is
// refused with the file's name, whether the archive is rewritten around it
// (checksums consistent) or the byte is flipped in place; so are a missing
// and an extra entry.
func TestTamperRefused(t *testing.T) {
	data := freezeDemo(t)
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	type tc struct {
		name, want string
		data       []byte
	}
	var cases []tc
	for _, f := range zr.File {
		name := f.Name
		for _, at := range []int{0, int(f.UncompressedSize64) / 2, int(f.UncompressedSize64) - 1} {
			cases = append(cases, tc{"rewritten " + name, name, rewrite(t, data, func(n string, c []byte) []byte {
				if n == name {
					return flip(c, at)
				}
				return c
			}, nil)})
		}
		off, err := f.DataOffset()
		if err != nil {
			t.Fatal(err)
		}
		cases = append(cases, tc{"in place " + name, name, flip(data, int(off)+int(f.UncompressedSize64)/2)})
	}
	cases = append(cases,
		tc{"missing logo", "okkerby-logo.png", rewrite(t, data, func(n string, c []byte) []byte {
			if n == "okkerby-logo.png" {
				return nil
			}
			return c
		}, nil)},
		tc{"extra file", "notes.txt", rewrite(t, data, func(_ string, c []byte) []byte { return c }, map[string][]byte{"notes.txt": []byte("x")})},
		tc{"duplicate entry", "okkerby-logo.png", rewrite(t, data, func(_ string, c []byte) []byte { return c },
			map[string][]byte{"okkerby-logo.png": []byte("x")})},
		tc{"comment", bundle.ManifestName, flip(data, len(data)-1)},
	)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := bundle.Read(c.data, "b"+bundle.Ext)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got %v, want a refusal naming %s", err, c.want)
			}
			t.Log(err)
		})
	}
}

// craft builds a bundle from a manifest and entries, with a consistent
// archive comment, as a forger with a zip tool could.
func craft(t *testing.T, manifest string, files map[string]string) []byte {
	t.Helper()
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	add := func(name, content string) {
		w, err := zw.Create(name)
		if err == nil {
			_, err = io.WriteString(w, content)
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	add(bundle.ManifestName, manifest)
	for _, n := range []string{"p.hcl", "logo.png", "notes.txt"} {
		if c, ok := files[n]; ok {
			add(n, c)
		}
	}
	sum := sha256.Sum256([]byte(manifest))
	if err := zw.SetComment(bundle.Schema + " manifest.json sha256 " + hex.EncodeToString(sum[:])); err != nil {
		t.Fatal(err)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func manifestFor(files map[string]string, revision string) string {
	var list []string
	for _, n := range []string{"p.hcl", "logo.png", "notes.txt"} {
		if c, ok := files[n]; ok {
			sum := sha256.Sum256([]byte(c))
			list = append(list, `{"path": "`+n+`", "size": `+strconv.Itoa(len(c))+`, "sha256": "`+hex.EncodeToString(sum[:])+`"}`)
		}
	}
	return `{"schema": "lotgate.bundle/v1", "pipeline": {"name": "m", "revision": ` + revision +
		`, "description": "", "file": "p.hcl"}, "lotgate_version": "0.1.0", "frozen_at": "2026-12-01T00:00:00Z", "files": [` +
		strings.Join(list, ", ") + "]}"
}

// A bundle whose manifest is consistent but lies about the pipeline, lists a
// file the pipeline does not use, or whose pipeline names a file outside
// the bundle is refused: a bundle never reads a file from outside itself.
func TestCraftedRefused(t *testing.T) {
	// bundle.go is in the test's working folder and ../bundle.go beside
	// it, so a bundle that read from the disk would find them.
	withLogo := func(logo string) string {
		return "pipeline \"m\" {\n  revision = 1\n}\nreport {\n  logo = \"" + logo + "\"\n}\n"
	}
	cases := []struct {
		name     string
		files    map[string]string
		revision string
		want     string
	}{
		{"revision mismatch", map[string]string{"p.hcl": withLogo("logo.png"), "logo.png": "png"}, "2", "revision 2"},
		{"unused file", map[string]string{"p.hcl": withLogo("logo.png"), "logo.png": "png", "notes.txt": "n"}, "1", "notes.txt"},
		{"escaping logo", map[string]string{"p.hcl": withLogo("../bundle/bundle.go")}, "1", "outside the bundle"},
		{"absolute logo", map[string]string{"p.hcl": withLogo("/etc/hostname")}, "1", "outside the bundle"},
		{"logo not in bundle", map[string]string{"p.hcl": withLogo("bundle.go")}, "1", "bundle.go"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			data := craft(t, manifestFor(c.files, c.revision), c.files)
			_, err := bundle.Read(data, "crafted"+bundle.Ext)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got %v, want a refusal mentioning %q", err, c.want)
			}
			t.Log(err)
		})
	}
}

func TestFreezeRefused(t *testing.T) {
	dir := t.TempDir()
	write := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	write("logo.png", "png")
	outside := write("sub/p.hcl", "pipeline \"m\" {\n  revision = 1\n}\nreport {\n  logo = \"../logo.png\"\n}\n")
	reserved := write("r/p.hcl", "pipeline \"m\" {\n  revision = 1\n}\nreport {\n  logo = \"manifest.json\"\n}\n")
	write("r/manifest.json", "{}")
	frozen := write("f.lotgate", string(freezeDemo(t)))
	cases := []struct{ name, path, want string }{
		{"file outside the folder", outside, "outside its folder"},
		{"reserved name", reserved, "manifest"},
		{"already a bundle", frozen, "already a bundle"},
		{"no such file", filepath.Join(dir, "none.hcl"), "none.hcl"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := bundle.Freeze(c.path, at)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got %v, want an error saying %q", err, c.want)
			}
		})
	}
}

// Load tells a bundle from a pipeline by its content, not its name.
func TestLoadByContent(t *testing.T) {
	dir := t.TempDir()
	disguised := filepath.Join(dir, "bundle.hcl")
	if err := os.WriteFile(disguised, freezeDemo(t), 0o644); err != nil {
		t.Fatal(err)
	}
	src, err := os.ReadFile(demo)
	if err != nil {
		t.Fatal(err)
	}
	plain := filepath.Join(dir, "plain"+bundle.Ext)
	if err := os.WriteFile(plain, src, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "okkerby-logo.png"), []byte("logo"), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err := bundle.Load(disguised)
	if err != nil || p.Bundle == "" {
		t.Errorf("bundle named .hcl: %v, bundle digest %q", err, p.Bundle)
	}
	p, err = bundle.Load(plain)
	if err != nil || p.Bundle != "" {
		t.Errorf("pipeline named %s: %v, bundle digest %q", bundle.Ext, err, p.Bundle)
	}
	b, err := bundle.OpenAny(plain)
	if err != nil || b.Digest != "" || b.Pipeline.Bundle != "" || b.Manifest.Pipeline.Revision != 3 {
		t.Errorf("OpenAny of a plain pipeline: %v, %+v", err, b)
	}
}

// The committed bundle was frozen once (go test ./pipeline/bundle -update)
// and its golden records made from it; on a clean checkout it must load and
// replay the demo data to the same records. A change to the numerical code
// that moves any number shows here.
func TestFixtureReplays(t *testing.T) {
	if *update {
		data := freezeDemo(t)
		if err := os.WriteFile(fixture, data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	b, err := bundle.Open(fixture)
	if err != nil {
		t.Fatal(err)
	}
	files, _ := filepath.Glob(filepath.Join(dataDir, "*.csv"))
	if len(files) != 3 {
		t.Fatalf("found %d demo data files, want 3", len(files))
	}
	for _, file := range files {
		golden := filepath.Join("testdata", "golden", strings.TrimSuffix(filepath.Base(file), ".csv")+".json")
		rec, err := b.Pipeline.ProcessFile(context.Background(), file, at)
		if err != nil {
			t.Fatal(err)
		}
		rec.Trace = nil // golden records are kept without their trace arrays
		if *update {
			out, err := rec.Marshal()
			if err == nil {
				err = os.WriteFile(golden, out, 0o644)
			}
			if err != nil {
				t.Fatal(err)
			}
			continue
		}
		old, err := replay.ReadRecord(golden)
		if err != nil {
			t.Fatal(err)
		}
		if old.Provenance.BundleSHA256 != b.Digest {
			t.Errorf("%s names bundle %s, the fixture is %s", golden, old.Provenance.BundleSHA256, b.Digest)
		}
		if err := replay.VerifyData(file, old); err != nil {
			t.Fatalf("the demo data changed since the fixture was made: %v", err)
		}
		res, err := replay.Compare(old, rec, 0)
		if err != nil {
			t.Fatal(err)
		}
		if !res.Same() || res.MaxRel != 0 {
			var b strings.Builder
			_ = replay.WriteDiffs(&b, res)
			t.Errorf("%s does not replay to its golden record (largest relative difference %g); if the change is intended, run go test ./pipeline/bundle -update\n%s",
				filepath.Base(file), res.MaxRel, b.String())
		}
	}
}

func FuzzRead(f *testing.F) {
	if data, err := os.ReadFile(fixture); err == nil {
		f.Add(data)
	}
	f.Add([]byte("PK\x03\x04"))
	f.Add([]byte("PK\x05\x06\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00\x00"))
	f.Add([]byte("pipeline \"m\" { revision = 1 }"))
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := bundle.Read(data, "fuzz"+bundle.Ext)
		if err != nil {
			return
		}
		sum := sha256.Sum256(data)
		if b.Digest != hex.EncodeToString(sum[:]) || b.Pipeline == nil {
			t.Fatalf("accepted bundle with digest %s, want %x", b.Digest, sum)
		}
		for _, m := range b.Manifest.Files {
			c, ok := b.File(m.Path)
			s := sha256.Sum256(c)
			if !ok || hex.EncodeToString(s[:]) != m.SHA256 {
				t.Fatalf("accepted %s, which does not match the manifest", m.Path)
			}
		}
	})
}

func BenchmarkFreeze(b *testing.B) {
	for b.Loop() {
		if _, err := bundle.Freeze(demo, at); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkLoad(b *testing.B) {
	path := filepath.Join(b.TempDir(), "demo"+bundle.Ext)
	data := freezeDemo(b)
	if err := os.WriteFile(path, data, 0o644); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := bundle.Load(path); err != nil {
			b.Fatal(err)
		}
	}
}
