package reports

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"flag"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
	"unicode"

	"lotgate/pipeline"
	"lotgate/rules"
)

// -pdf.out writes the certificates the tests render into a folder, to look at.
var pdfOut = flag.String("pdf.out", "", "write the rendered test certificates into this folder")

// demoTime is the run time of the demo records (SOURCE_DATE_EPOCH of the demo).
var demoTime = time.Unix(1796083200, 0)

var demo = sync.OnceValues(func() (*pipeline.Pipeline, error) {
	return pipeline.Load(filepath.Join("..", "examples", "toluene-release.hcl"))
})

// demoRecords holds, per demo data file, a function that processes it once.
var demoRecords sync.Map

// demoRecord returns the record of one of the demo data files, processed
// once for all tests: callers must not change it.
func demoRecord(t testing.TB, file string) (*pipeline.Record, []byte) {
	t.Helper()
	p, err := demo()
	if err != nil {
		t.Fatal(err)
	}
	once, _ := demoRecords.LoadOrStore(file, sync.OnceValues(func() (*pipeline.Record, error) {
		return p.ProcessFile(context.Background(), filepath.Join("..", "examples", "data", file), demoTime)
	}))
	rec, err := once.(func() (*pipeline.Record, error))()
	if err != nil {
		t.Fatal(err)
	}
	return rec, p.Logo
}

// render renders rec and, with -pdf.out, keeps the file as name.pdf.
func render(t testing.TB, name string, rec *pipeline.Record, logo []byte) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := WritePDF(&b, rec, logo); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if *pdfOut != "" {
		if err := os.WriteFile(filepath.Join(*pdfOut, name+".pdf"), b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return b.Bytes()
}

// tool finds a command-line tool; without it the test is skipped, except on
// CI (CI=true), where its absence is a failure.
func tool(t *testing.T, name string) string {
	t.Helper()
	path, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s is needed on CI: %v", name, err)
		}
		t.Skipf("%s is not installed", name)
	}
	return path
}

// run runs a tool on a PDF: name, its options, the PDF file, then more
// arguments.
func run(t *testing.T, pdf []byte, name string, opts []string, after ...string) string {
	t.Helper()
	path := tool(t, name)
	file := filepath.Join(t.TempDir(), "c.pdf")
	if err := os.WriteFile(file, pdf, 0o644); err != nil {
		t.Fatal(err)
	}
	args := append(append(slices.Clone(opts), file), after...)
	var stderr bytes.Buffer
	cmd := exec.Command(path, args...)
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("%s %s: %v\n%s%s", name, strings.Join(args, " "), err, out, stderr.Bytes())
	}
	return string(out)
}

// text extracts the certificate's text, keeping its layout (poppler's
// pdftotext).
func extract(t *testing.T, pdf []byte) string {
	t.Helper()
	return run(t, pdf, "pdftotext", []string{"-layout", "-enc", "UTF-8"}, "-")
}

// pageTexts splits pdftotext output into pages (form feeds).
func pageTexts(s string) []string {
	pages := strings.Split(s, "\f")
	if pages[len(pages)-1] == "" || strings.TrimSpace(pages[len(pages)-1]) == "" {
		pages = pages[:len(pages)-1]
	}
	return pages
}

// words collapses all white space, so that a wrapped paragraph reads as one.
func words(s string) string { return strings.Join(strings.Fields(s), " ") }

// inOrder reports whether the words of want appear in txt in order (other
// words may come between them: a header's second column, a wrapped cell).
func inOrder(txt, want string) bool {
	for _, w := range strings.Fields(want) {
		i := strings.Index(txt, w)
		if i < 0 {
			return false
		}
		txt = txt[i+len(w):]
	}
	return true
}

// rowPattern matches a table row's first line: the start of the first
// cell (which may wrap) and then the other cells in order; pdftotext may
// close the gap between a sign and its number.
func rowPattern(first string, cells ...string) *regexp.Regexp {
	ws := strings.Fields(clean(first))
	re := regexp.QuoteMeta(strings.Join(ws[:min(3, len(ws))], " ")) + `.*`
	for _, c := range cells {
		re += `\s+` + strings.ReplaceAll(regexp.QuoteMeta(c), " ", " *")
	}
	return regexp.MustCompile(re)
}

// qpdfCheck runs qpdf's structural check, an independent PDF parser (it
// exits non-zero on errors and on warnings).
func qpdfCheck(t *testing.T, pdf []byte) {
	t.Helper()
	run(t, pdf, "qpdf", []string{"--check"})
}

var (
	pageRE = regexp.MustCompile(`<page width="([0-9.]+)" height="([0-9.]+)">`)
	wordRE = regexp.MustCompile(`<word xMin="([0-9.]+)" yMin="([0-9.]+)" xMax="([0-9.]+)" yMax="([0-9.]+)">([^<]*)</word>`)
)

// checkInside fails when any word of the certificate, as poppler places it,
// lies outside the body's horizontal margins or below the page: nothing
// overflows a cell onto the margin or off the paper.
func checkInside(t *testing.T, pdf []byte) {
	t.Helper()
	out := run(t, pdf, "pdftotext", []string{"-bbox", "-enc", "UTF-8"}, "-")
	page, width, height := 0, 0.0, 0.0
	margin := marginX / mmPerPoint
	const tol = 1.0 // points
	for _, line := range strings.Split(out, "\n") {
		if m := pageRE.FindStringSubmatch(line); m != nil {
			page++
			width, _ = strconv.ParseFloat(m[1], 64)
			height, _ = strconv.ParseFloat(m[2], 64)
			continue
		}
		m := wordRE.FindStringSubmatch(line)
		if m == nil {
			continue
		}
		var box [4]float64
		for i := range box {
			box[i], _ = strconv.ParseFloat(m[i+1], 64)
		}
		if box[0] < margin-tol || box[2] > width-margin+tol || box[3] > height {
			t.Errorf("page %d: %q at x %.1f–%.1f, y %.1f–%.1f is outside the body (%.1f–%.1f pt, %.1f high)",
				page, m[5], box[0], box[2], box[1], box[3], margin, width-margin, height)
		}
	}
}

// checkPages checks "Page N of M" on every page, counting the pages poppler
// finds, and returns M.
func checkPages(t *testing.T, txt string) int {
	t.Helper()
	pages := pageTexts(txt)
	for i, p := range pages {
		if want := fmt.Sprintf("Page %d of %d", i+1, len(pages)); !strings.Contains(p, want) {
			t.Errorf("page %d has no %q", i+1, want)
		}
	}
	return len(pages)
}

// recordDigest is the SHA-256 (FIPS 180-4) of the bytes `lotgate run`
// writes as the record, computed here apart from the certificate's code.
func recordDigest(t *testing.T, rec *pipeline.Record) string {
	t.Helper()
	b, err := rec.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:])
}

// wantSpec writes a limit's specification as a certificate states it
// (common practice: "≥ min", "≤ max", "min – max").
func wantSpec(l pipeline.LimitRec) string {
	switch {
	case l.Min != "" && l.Max != "":
		return l.Min + " – " + l.Max
	case l.Min != "":
		return "≥ " + l.Min
	}
	return "≤ " + l.Max
}

// checkContent checks that the certificate states what the record holds
// (the record is the contract): the verdict, every limit as reported
// against its specification, the digests, the cautions, the signature
// lines and the page numbers.
func checkContent(t *testing.T, rec *pipeline.Record, txt string) {
	t.Helper()
	flat := words(txt)
	verdict := map[string]string{rules.Pass: "CONFORMS to the specification",
		rules.Fail: "DOES NOT CONFORM to the specification"}[rec.Verdict]
	if verdict == "" {
		verdict = "COULD NOT BE DETERMINED"
	}
	if !strings.Contains(flat, verdict) {
		t.Errorf("verdict %q: no %q", rec.Verdict, verdict)
	}
	for _, l := range rec.Limits {
		// One table row: the name, the result as the record reports it, the
		// specification's bounds as the record states them.
		reported := l.Reported
		if reported == "" {
			reported = "—"
		}
		row := rowPattern(l.Name, reported, wantSpec(l))
		if !row.MatchString(txt) {
			t.Errorf("no row for limit %q: want /%s/", l.Name, row)
		}
		if l.Status != rules.Pass && !strings.Contains(flat, words(l.Reason)) {
			t.Errorf("limit %q: reason %q missing", l.Name, l.Reason)
		}
	}
	for _, d := range []string{rec.Provenance.PipelineSHA256, rec.Provenance.InputSHA256, recordDigest(t, rec)} {
		if !strings.Contains(txt, d) {
			t.Errorf("digest %s missing", d)
		}
	}
	for _, c := range rec.Report.Cautions {
		if !strings.Contains(flat, words(c)) {
			t.Errorf("caution missing: %q", c)
		}
	}
	for _, s := range rec.Report.Signatures {
		if ws := strings.Fields(s); !inOrder(flat, strings.Join(ws[:min(len(ws), 3)], " ")) {
			t.Errorf("signature line %q missing", s)
		}
	}
	checkPages(t, txt)
}

func TestDemoCertificates(t *testing.T) {
	for _, f := range []string{"T998-26-1141.csv", "T998-26-1142.csv", "blank-26-1141.csv"} {
		t.Run(f, func(t *testing.T) {
			t.Parallel()
			rec, logo := demoRecord(t, f)
			pdf := render(t, Stem(f), rec, logo)
			qpdfCheck(t, pdf)
			txt := extract(t, pdf)
			checkContent(t, rec, txt)
			checkInside(t, pdf)
			flat := words(txt)
			for _, want := range []string{"Certificate of analysis", rec.Report.Site, rec.Report.Product,
				rec.Report.Grade, meta(rec, "lot"), meta(rec, "sample_id"), meta(rec, "operator"),
				meta(rec, "instrument"), "toluene-release, revision 3", rec.Provenance.ProcessedAt,
				"Chromatogram", "Time (min)", "Full scale"} {
				if !inOrder(flat, want) {
					t.Errorf("%q missing", want)
				}
			}
			if len(rec.Peaks) > 0 && !strings.Contains(flat, "Area (pA·s)") {
				t.Error("the peaks table has no area column in pA·s")
			}
			for _, p := range rec.Peaks {
				if !strings.Contains(flat, p.Name) {
					t.Errorf("peak %d %q missing", p.Number, p.Name)
				}
			}
			// The header is on every page.
			for i, p := range pageTexts(txt) {
				if !strings.Contains(words(p), "Certificate of analysis") || !strings.Contains(words(p), rec.Report.Product) {
					t.Errorf("page %d has no header", i+1)
				}
			}
		})
	}
}

func TestDemoVerdicts(t *testing.T) {
	// The failing demo lot names its failing limit and its reason beside the
	// verdict; the certificate says "does not conform" in that limit's row.
	rec, logo := demoRecord(t, "T998-26-1142.csv")
	if rec.Verdict != rules.Fail {
		t.Fatalf("demo lot T998-26-1142 has verdict %q; the demo makes it fail", rec.Verdict)
	}
	txt := extract(t, render(t, "fail", rec, logo))
	for _, l := range rec.Limits {
		line := regexp.MustCompile(rowPattern(l.Name, wantSpec(l)).String() + `.*`).FindString(txt)
		want := map[string]string{rules.Pass: "conforms", rules.Fail: "does not conform"}[l.Status]
		if !strings.HasSuffix(strings.TrimSpace(line), want) {
			t.Errorf("row %q: want conformity %q", line, want)
		}
	}
}

// synthTrace returns n samples of a slowly rising baseline with Gaussian
// peaks (rt, sigma and height in minutes and pA).
func synthTrace(n int, interval float64, peaks [][3]float64) (raw, base []float64) {
	raw, base = make([]float64, n), make([]float64, n)
	for i := range raw {
		t := float64(i) * interval
		base[i] = 2 + 0.02*t
		raw[i] = base[i] + 0.01*math.Sin(float64(i)*1.7)
		for _, p := range peaks {
			d := (t - p[0]) / p[1]
			if math.Abs(d) < 8 {
				raw[i] += p[2] * math.Exp(-0.5*d*d)
			}
		}
	}
	return raw, base
}

func hexOf(s string) string {
	sum := sha256.Sum256([]byte(s))
	return hex.EncodeToString(sum[:])
}

func ptr(x float64) *float64 { return &x }

// synthRecord builds a record from scratch: npeaks peaks (the middle one the
// main component), a limit of each kind and a failing one.
func synthRecord(npeaks int) *pipeline.Record {
	const n, interval = 6000, 0.005
	var shapes [][3]float64
	var peaks []pipeline.PeakRec
	mainAt := npeaks / 2
	for k := range npeaks {
		rt := 1 + 27*float64(k)/float64(max(npeaks, 1))
		h := 2 + float64(k%7)
		if k == mainAt {
			h = 40000
		}
		shapes = append(shapes, [3]float64{rt, 0.01, h})
		area := h * 0.01 * math.Sqrt(2*math.Pi) * 60
		pr := pipeline.PeakRec{Number: k + 1, Name: pipeline.UnknownName(rt), RTMin: rt, StartMin: rt - 0.04,
			EndMin: rt + 0.04, Boundary: "baseline", Area: area, Height: h, SNR: h / 0.01,
			Percent: ptr(100 * h / (40000 + 5*float64(npeaks))), Reported: k%5 != 3}
		if k == mainAt {
			pr.Name, pr.Component = "main solvent", "main solvent"
		}
		if k%9 == 1 {
			pr.Tailing, pr.Percent = nil, nil
		}
		peaks = append(peaks, pr)
	}
	raw, base := synthTrace(n, interval, shapes)
	var comps []pipeline.ComponentRec
	if npeaks > 0 {
		num := mainAt + 1
		comps = append(comps, pipeline.ComponentRec{Name: "main solvent", Main: true, ExpectedRT: peaks[mainAt].RTMin,
			WindowMin: 0.1, RRF: 1, Status: "found", Peak: &num})
	}
	comps = append(comps, pipeline.ComponentRec{Name: "dichloro-impurity", ExpectedRT: 29.5, WindowMin: 0.05, RRF: 1,
		Status: "not-detected"})
	limits := []pipeline.LimitRec{
		{Name: "Assay", Value: ptr(99.61), Reported: "99.6", Min: "99.5", Digits: 1, Unit: "%", Rounding: "astm-e29", Status: rules.Pass},
		{Name: "Any unknown", Value: ptr(0.04), Reported: "0.04", Max: "0.10", Digits: 2, Unit: "%", Rounding: "half-up", Status: rules.Pass},
		{Name: "Density at 20 °C", Value: ptr(0.8671), Reported: "0.867", Min: "0.865", Max: "0.870", Digits: 3, Unit: "g/mL",
			Rounding: "absolute", Status: rules.Pass},
		{Name: "Residue on evaporation", Value: ptr(0.0032), Reported: "0.003", Max: "0.002", Digits: 3, Unit: "% (m/m)",
			Rounding: "astm-e29", Status: rules.Fail, Reason: "0.003 % (m/m) is above the maximum 0.002 % (m/m)"},
	}
	return &pipeline.Record{
		Schema: pipeline.Schema,
		Provenance: pipeline.Provenance{Tool: "lotgate", Version: pipeline.Version, PipelineFile: "synthetic.hcl",
			PipelineSHA256: hexOf("pipeline"), InputFile: "synthetic-run.csv", InputSHA256: hexOf("input"),
			ProcessedAt: "2026-03-04T05:06:07Z"},
		Sample: pipeline.Sample{Metadata: []pipeline.MetaRec{{Key: "lot", Value: "S-0001"},
			{Key: "sample_id", Value: "S-0001-A"}, {Key: "sample_type", Value: "sample"}, {Key: "operator", Value: "A. Tester"}}},
		Method: pipeline.Method{Name: "synthetic", Revision: 1, Description: "a record built by the test"},
		Units:  pipeline.Units{Time: "min", Signal: "pA", Area: "pA·s"},
		Noise:  &pipeline.NoiseRec{SD: 0.005, PeakToPeak: 0.03, Method: "blocks"},
		Peaks:  peaks, Components: comps,
		Quant:   &pipeline.QuantRec{Method: "normalized", UnknownRRF: 1, ReportingThreshold: 0.005, TotalArea: 1},
		Limits:  limits,
		Verdict: rules.Fail,
		Warnings: []string{"baseline: a synthetic warning that is long enough to wrap onto a second line of the " +
			"certificate, so that wrapping of warnings is exercised as well as the rest"},
		Report: pipeline.ReportSettings{Formats: []string{"json", "pdf"}, Site: "Synthetic site, test laboratory",
			Address: []string{"1 Test Street"}, Product: "Test solvent", Grade: "Grade T", Paper: "A4",
			Signatures: []string{"Analysed by", "Approved by"},
			Cautions:   append(slices.Clone(pipeline.DefaultCautions), "Synthetic note for the test.")},
		Trace: &pipeline.TraceRec{Points: n, StartMin: 0, IntervalMin: interval, Raw: raw, Processed: raw, Baseline: base},
	}
}

func TestSyntheticCertificates(t *testing.T) {
	long := strings.Repeat("VeryLongSampleIdentifierWithoutAnySpace", 8)
	longWords := strings.TrimSpace(strings.Repeat("a long sample description that keeps going ", 12))
	cases := []struct {
		name   string
		edit   func(r *pipeline.Record)
		check  func(t *testing.T, txt string, pages int)
		npeaks int
	}{
		{name: "zero-peaks", npeaks: 0, check: func(t *testing.T, txt string, _ int) {
			if !strings.Contains(txt, "No peaks were detected.") {
				t.Error("no statement that no peaks were detected")
			}
		}},
		{name: "200-peaks", npeaks: 200, check: func(t *testing.T, txt string, pages int) {
			if pages < 3 {
				t.Errorf("%d pages for 200 peaks; the table cannot fit on fewer than 3", pages)
			}
			// The heading row is repeated on every page the table reaches.
			head := regexp.MustCompile(`No\. +Peak +RT \(min\) +Area \(pA·s\) +Height \(pA\) +Normalized % +S/N`)
			heads := 0
			for _, p := range pageTexts(txt) {
				heads += len(head.FindAllString(p, -1))
			}
			if heads < 2 || !strings.Contains(txt, "Peaks (continued)") {
				t.Errorf("the peaks table's heading appears %d times, want it repeated on each of its pages", heads)
			}
			flat := words(txt)
			for k := range 200 {
				rt := 1 + 27*float64(k)/200
				name := pipeline.UnknownName(rt)
				if k == 100 {
					name = "main solvent"
				}
				if !strings.Contains(flat, name) {
					t.Errorf("peak %d %q missing", k+1, name)
				}
			}
		}},
		{name: "long-names", npeaks: 12, edit: func(r *pipeline.Record) {
			r.Sample.Metadata[1].Value = long
			r.Sample.Metadata = append(r.Sample.Metadata, pipeline.MetaRec{Key: "instrument", Value: longWords})
			r.Report.Site = longWords
			r.Report.Signatures = append(r.Report.Signatures, longWords)
			r.Peaks[3].Name, r.Peaks[3].Component = long, long
			r.Limits[0].Name = longWords
		}, check: func(t *testing.T, txt string, _ int) {
			// Long text is wrapped or cut with an ellipsis, never lost whole.
			flat := words(txt)
			if !strings.Contains(flat, long[:24]) || !strings.Contains(flat, "a long sample description") ||
				!strings.Contains(flat, "…") {
				t.Error("long names are neither wrapped nor ellipsised")
			}
		}},
		{name: "unicode", npeaks: 8, edit: func(r *pipeline.Record) {
			r.Peaks[2].Name, r.Peaks[2].Component = "Lösemittel µ-Spur bei 40 °C", "Lösemittel µ-Spur bei 40 °C"
			r.Report.Site = "Prüflabor Süd — Qualität"
			r.Sample.Metadata[3].Value = "J. Müller\tnight\nshift"
			r.Limits[1].Name = "Unbekannte (µg/g, 20 °C) 中文 🧪"
			r.Units.Signal = "µV"
		}, check: func(t *testing.T, txt string, _ int) {
			flat := words(txt)
			for _, want := range []string{"Lösemittel µ-Spur bei 40 °C", "Prüflabor Süd — Qualität", "Area (pA·s)",
				"Height (µV)", "J. Müller night shift", "Unbekannte (µg/g, 20 °C) ?? ?", "≥ 99.5", "≤ 0.10", "0.865 – 0.870"} {
				if !strings.Contains(flat, want) {
					t.Errorf("%q missing", want)
				}
			}
		}},
		{name: "letter-no-logo-undetermined", npeaks: 5, edit: func(r *pipeline.Record) {
			r.Report.Paper = "Letter"
			r.Limits[3] = pipeline.LimitRec{Name: "Water", Min: "", Max: "0.05", Digits: 2, Unit: "%", Rounding: "astm-e29",
				Status: rules.Erred, Reason: "no value: meta.water_kf_pct is missing"}
			r.Verdict = rules.Undetermined
		}, check: func(t *testing.T, txt string, _ int) {
			if !strings.Contains(words(txt), "not determined") {
				t.Error("the erred limit is not shown as not determined")
			}
		}},
		{name: "no-trace-no-limits", npeaks: 3, edit: func(r *pipeline.Record) {
			r.Trace, r.Limits, r.Verdict, r.Report.Signatures = nil, nil, rules.Pass, nil
		}, check: func(t *testing.T, txt string, _ int) {
			for _, want := range []string{"No specification limit applied to this run.", "The record holds no trace to draw."} {
				if !strings.Contains(words(txt), want) {
					t.Errorf("%q missing", want)
				}
			}
		}},
	}
	_, logo := demoRecord(t, "T998-26-1141.csv")
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			rec := synthRecord(c.npeaks)
			if c.edit != nil {
				c.edit(rec)
			}
			l := logo
			if rec.Report.Paper == "Letter" {
				l = nil
			}
			pdf := render(t, c.name, rec, l)
			qpdfCheck(t, pdf)
			txt := extract(t, pdf)
			checkContent(t, rec, txt)
			checkInside(t, pdf)
			c.check(t, txt, len(pageTexts(txt)))
		})
	}
}

func TestReproducible(t *testing.T) {
	// The same record gives the same bytes: no clock, no map order, no
	// random ids. Many distinct runes go into the fonts' subsets.
	demoRec, logo := demoRecord(t, "T998-26-1141.csv")
	rec := *demoRec
	rec.Peaks = slices.Clone(rec.Peaks)
	rec.Peaks[0].Name = "µ μ\u00a0x ° ü Ω Ω Ж ŝ ≈ ±"
	first := render(t, "reproducible", &rec, logo)
	for i := range 2 {
		if i == 1 {
			time.Sleep(1100 * time.Millisecond) // across a change of the clock's second
		}
		if again := render(t, "reproducible", &rec, logo); !bytes.Equal(first, again) {
			t.Fatalf("render %d differs from the first (%d and %d bytes)", i+2, len(first), len(again))
		}
	}
	if !bytes.Contains(first, []byte("/CreationDate (D:20261201000000)")) {
		t.Error("the creation date is not the record's processed_at")
	}
}

func TestWritePDFErrors(t *testing.T) {
	cases := []struct {
		name string
		edit func(r *pipeline.Record)
		logo []byte
		want string
	}{
		{"paper", func(r *pipeline.Record) { r.Report.Paper = "A3" }, nil, `paper "A3" is not known`},
		{"time", func(r *pipeline.Record) { r.Provenance.ProcessedAt = "yesterday" }, nil, "not an RFC 3339 time"},
		{"logo", nil, []byte("not an image"), "logo:"},
		{"huge logo", nil, hugePNG(), "at most 4096"},
		{"not finite", func(r *pipeline.Record) {
			r.Peaks[0].RTMin, r.Peaks[1].StartMin, r.Trace.Processed[10] = math.NaN(), math.Inf(1), math.NaN()
		}, nil, "digest"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec := synthRecord(2)
			if c.edit != nil {
				c.edit(rec)
			}
			err := WritePDF(&bytes.Buffer{}, rec, c.logo)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want one saying %q", err, c.want)
			}
		})
	}
	if err := WritePDF(&bytes.Buffer{}, nil, nil); err == nil {
		t.Error("a nil record gave no error")
	}
}

// hugePNG is a PNG header that claims 5000 × 10 pixels.
func hugePNG() []byte {
	var b bytes.Buffer
	if err := png.Encode(&b, image.NewGray(image.Rect(0, 0, 5000, 10))); err != nil {
		panic(err)
	}
	return b.Bytes()
}

func TestClean(t *testing.T) {
	cases := []struct{ in, want string }{
		{"plain ASCII", "plain ASCII"},
		{"pA·s ≥ ≤ – — … µ ° ü", "pA·s ≥ ≤ – — … µ ° ü"},
		{"tab\there\nnew line", "tab here new line"},
		{"中 🧪", "? ?"},
		{"bad \xff byte", "bad ? byte"},
		{"Greek μ, Cyrillic Ж", "Greek μ, Cyrillic Ж"},
	}
	for _, c := range cases {
		if got := clean(c.in); got != c.want {
			t.Errorf("clean(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

func TestWrap(t *testing.T) {
	c, err := newCert(synthRecord(0), nil)
	if err != nil {
		t.Fatal(err)
	}
	c.font(fontSans, "", 10)
	cases := []struct {
		in       string
		width    float64
		maxLines int
		want     []string
	}{
		{"short", 50, 0, []string{"short"}},
		{"", 50, 0, nil},
		{"one two three four five six", 20, 0, []string{"one two", "three four", "five six"}},
		{"one two three four five six", 20, 2, []string{"one two", "three four…"}},
		{"one two three four five six", 15, 1, []string{"one tw…"}},
		{"abcdefghijklmnopqrstuvwxyz", 15, 0, []string{"abcdefgh", "ijklmnopq", "rstuvwxy", "z"}},
	}
	for _, cs := range cases {
		got := c.wrap(cs.in, cs.width, cs.maxLines)
		if !slices.Equal(got, cs.want) {
			t.Errorf("wrap(%q, %g, %d) = %q, want %q", cs.in, cs.width, cs.maxLines, got, cs.want)
		}
		for _, l := range got {
			if w := c.doc.GetStringWidth(l); w > cs.width {
				t.Errorf("wrap(%q): line %q is %.2f mm wide, over %g", cs.in, l, w, cs.width)
			}
		}
	}
}

// FuzzWrap checks that wrapping never makes a line wider than asked (when
// one character fits) and, without a line limit, keeps every character.
func FuzzWrap(f *testing.F) {
	for _, s := range []string{"", "a b c", "Lösemittel µ-Spur bei 40 °C", strings.Repeat("x", 300), "a\tb\nc  d",
		"中文 🧪 \xff", "peak unknown 12.345 with a long name that wraps"} {
		f.Add(s, 30.0)
	}
	c, err := newCert(synthRecord(0), nil)
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, s string, width float64) {
		if !(width >= 5 && width <= 500) {
			return
		}
		c.font(fontSans, "", 9)
		lines := c.wrap(s, width, 0)
		for _, l := range lines {
			if w := c.doc.GetStringWidth(l); w > width && len([]rune(l)) > 1 {
				t.Errorf("line %q is %.2f mm wide, over %g", l, w, width)
			}
		}
		strip := func(s string) string {
			return strings.Map(func(r rune) rune {
				if unicode.IsSpace(r) {
					return -1
				}
				return r
			}, s)
		}
		if got, want := strip(strings.Join(lines, "")), strip(clean(s)); got != want {
			t.Errorf("wrapping lost text: %q, want %q", got, want)
		}
	})
}
