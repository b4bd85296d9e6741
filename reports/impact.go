package reports

import (
	"fmt"
	"strings"
	"time"

	"github.com/xuri/excelize/v2"
)

// Impact is what re-running past records under another pipeline version
// does to them: one row per record.
type Impact struct {
	// Pipeline names the new version (e.g. `"toluene-release" revision 4`)
	// and Bundle is its bundle digest ("" for a plain pipeline file).
	Pipeline string
	Bundle   string
	Rows     []ImpactRow
}

// ImpactRow is one past record re-run under the new version.
type ImpactRow struct {
	Record, Input, Lot, Sample string
	// OldVerdict is the record's; NewVerdict the re-run's ("" when the
	// record could not be re-run, see Error).
	OldVerdict, NewVerdict string
	// Limits lists the limits whose result, bounds or status change.
	Limits []LimitChange
	// Flags says in words what else changes (unrounded numbers, warnings,
	// the lotgate version that made the record).
	Flags []string
	Error string
}

// LimitChange is one limit before and after the method change. Reported
// values and bounds are the record's decimal text; a limit that exists on
// one side only has "" for the other side's fields.
type LimitChange struct {
	Name                     string
	OldReported, NewReported string
	OldLimit, NewLimit       string
	OldStatus, NewStatus     string
}

// VerdictChanged reports whether the row's verdict changes.
func (r ImpactRow) VerdictChanged() bool {
	return r.Error == "" && r.OldVerdict != r.NewVerdict
}

// String writes the change on one line:
// "Largest unknown: 0.015 (max 0.030) pass → 0.015 (max 0.010) fail".
func (c LimitChange) String() string {
	side := func(reported, limit, status string) string {
		if status == "" {
			return "(no such limit)"
		}
		s := reported
		if limit != "" {
			s += " (" + limit + ")"
		}
		return s + " " + status
	}
	return c.Name + ": " + side(c.OldReported, c.OldLimit, c.OldStatus) + " → " + side(c.NewReported, c.NewLimit, c.NewStatus)
}

// Counts returns how many records change verdict, how many have a changed
// limit result, and how many could not be re-run.
func (imp *Impact) Counts() (verdicts, limits, failed int) {
	for _, r := range imp.Rows {
		switch {
		case r.Error != "":
			failed++
			continue
		case r.VerdictChanged():
			verdicts++
		}
		if len(r.Limits) > 0 {
			limits++
		}
	}
	return verdicts, limits, failed
}

const (
	impactSheet = "Impact"
	limitsSheet = "Limits"
)

var impactHeader = []string{"Record", "Input file", "Lot", "Sample", "Old verdict", "New verdict", "Verdict changes",
	"Changed limits (old → new reported)", "Flags", "Error"}

var limitsHeader = []string{"Record", "Lot", "Sample", "Limit", "Old reported", "New reported", "Old limit", "New limit",
	"Old status", "New status"}

// ImpactWorkbook renders the impact as an xlsx workbook: a sheet with one
// row per record and a sheet with one row per changed limit. Every cell is
// text, as the record writes it. The document properties carry the time
// at, and nothing else in the file depends on the clock, so the same impact
// and time give the same bytes.
func ImpactWorkbook(imp *Impact, at time.Time) ([]byte, error) {
	f := excelize.NewFile()
	defer f.Close()
	if err := f.SetSheetName("Sheet1", impactSheet); err != nil {
		return nil, err
	}
	if _, err := f.NewSheet(limitsSheet); err != nil {
		return nil, err
	}
	bold, err := f.NewStyle(&excelize.Style{Font: &excelize.Font{Bold: true}})
	if err != nil {
		return nil, err
	}
	wrap, err := f.NewStyle(&excelize.Style{Alignment: &excelize.Alignment{WrapText: true, Vertical: "top"}})
	if err != nil {
		return nil, err
	}
	verdicts, limits, failed := imp.Counts()
	bundle := imp.Bundle
	if bundle == "" {
		bundle = "(a plain pipeline file, not a frozen bundle)"
	}
	intro := [][]string{
		{"Change impact of " + imp.Pipeline},
		{"Bundle sha256", bundle},
		{"Records", fmt.Sprint(len(imp.Rows))},
		{"Verdicts that change", fmt.Sprint(verdicts)},
		{"Records with changed limit results", fmt.Sprint(limits)},
		{"Records that could not be re-run", fmt.Sprint(failed)},
	}
	for i, row := range intro {
		if err := impactRow(f, impactSheet, i+1, row, 0); err != nil {
			return nil, err
		}
	}
	top := len(intro) + 2
	if err := impactRow(f, impactSheet, top, impactHeader, bold); err != nil {
		return nil, err
	}
	if err := impactRow(f, limitsSheet, 1, limitsHeader, bold); err != nil {
		return nil, err
	}
	next := 2
	for i, r := range imp.Rows {
		changes := make([]string, len(r.Limits))
		for j, c := range r.Limits {
			changes[j] = c.String()
			row := []string{r.Record, r.Lot, r.Sample, c.Name, c.OldReported, c.NewReported, c.OldLimit, c.NewLimit, c.OldStatus, c.NewStatus}
			if err := impactRow(f, limitsSheet, next, row, 0); err != nil {
				return nil, err
			}
			next++
		}
		changed := "no"
		if r.VerdictChanged() {
			changed = "yes"
		}
		row := []string{r.Record, r.Input, r.Lot, r.Sample, r.OldVerdict, r.NewVerdict, changed,
			strings.Join(changes, "\n"), strings.Join(r.Flags, "\n"), r.Error}
		if err := impactRow(f, impactSheet, top+1+i, row, wrap); err != nil {
			return nil, err
		}
	}
	widths := []float64{22, 22, 16, 18, 12, 12, 10, 70, 40, 40}
	for i, w := range widths {
		col, _ := excelize.ColumnNumberToName(i + 1)
		if err := f.SetColWidth(impactSheet, col, col, w); err != nil {
			return nil, err
		}
	}
	if err := f.SetColWidth(limitsSheet, "A", "J", 18); err != nil {
		return nil, err
	}
	if err := f.SetPanes(impactSheet, &excelize.Panes{Freeze: true, YSplit: top, TopLeftCell: fmt.Sprintf("A%d", top+1), ActivePane: "bottomLeft"}); err != nil {
		return nil, err
	}
	if err := impactProps(f, "Change impact of "+imp.Pipeline, at); err != nil {
		return nil, err
	}
	buf, err := f.WriteToBuffer()
	if err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// impactRow writes text cells from column A of row n, with a style when
// style is not 0.
func impactRow(f *excelize.File, sheet string, n int, cells []string, style int) error {
	for i, v := range cells {
		ref, err := excelize.CoordinatesToCellName(i+1, n)
		if err != nil {
			return err
		}
		if err := f.SetCellStr(sheet, ref, v); err != nil {
			return err
		}
		if style != 0 {
			if err := f.SetCellStyle(sheet, ref, ref, style); err != nil {
				return err
			}
		}
	}
	return nil
}

// impactProps sets the document properties from the given time instead of
// the library's defaults, so that the workbook's bytes do not depend on
// when it was made.
func impactProps(f *excelize.File, title string, at time.Time) error {
	stamp := at.UTC().Format(time.RFC3339)
	return f.SetDocProps(&excelize.DocProperties{
		Title: title, Creator: "lotgate", LastModifiedBy: "lotgate",
		Created: stamp, Modified: stamp,
	})
}
