package replay

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
	"unicode/utf8"

	"lotgate/reports"
)

// cellWidth is the longest text a table cell shows; longer values are cut
// with an ellipsis (the record holds them in full).
const cellWidth = 72

func cell(s string) string {
	s = strings.ReplaceAll(s, "\n", " ")
	s = strings.ReplaceAll(s, "\t", " ")
	if utf8.RuneCountInString(s) <= cellWidth {
		return s
	}
	r := []rune(s)
	return string(r[:cellWidth-1]) + "…"
}

func table(w io.Writer, header []string, rows [][]string) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	for _, r := range append([][]string{header}, rows...) {
		cells := make([]string, len(r))
		for i, c := range r {
			cells[i] = cell(c)
		}
		fmt.Fprintln(tw, strings.Join(cells, "\t"))
	}
	return tw.Flush()
}

// WriteDiffs writes the differing fields as a table of field, old value,
// new value and, for numbers, their relative difference.
func WriteDiffs(w io.Writer, res Result) error {
	rows := make([][]string, len(res.Diffs))
	for i, d := range res.Diffs {
		rel := ""
		if d.Numeric {
			rel = fmt.Sprintf("%.3g", d.Rel)
		}
		if d.Note != "" {
			rel = strings.TrimSpace(rel + " " + d.Note)
		}
		rows[i] = []string{d.Field, d.Old, d.New, rel}
	}
	return table(w, []string{"FIELD", "OLD", "NEW", "RELATIVE DIFFERENCE"}, rows)
}

// WriteChanges writes pipeline parameter changes as a table.
func WriteChanges(w io.Writer, cs []Change) error {
	rows := make([][]string, len(cs))
	for i, c := range cs {
		rows[i] = []string{c.Where, c.Name, c.Old, c.New}
	}
	return table(w, []string{"WHERE", "SETTING", "OLD", "NEW"}, rows)
}

// WriteImpact writes the impact of a method change as a table, one line
// per changed limit, and a closing count.
func WriteImpact(w io.Writer, imp *reports.Impact) error {
	var rows [][]string
	for _, r := range imp.Rows {
		verdict := r.OldVerdict
		switch {
		case r.Error != "":
			verdict += " → ?"
		case r.VerdictChanged():
			verdict += " → " + strings.ToUpper(r.NewVerdict)
		}
		first := []string{r.Record, r.Lot, r.Sample, verdict, "—"}
		if r.Error != "" {
			first[4] = "not re-run: " + r.Error
		}
		for i, c := range r.Limits {
			if i == 0 {
				first[4] = c.String()
				rows = append(rows, first)
				continue
			}
			rows = append(rows, []string{"", "", "", "", c.String()})
		}
		if len(r.Limits) == 0 {
			rows = append(rows, first)
		}
		for _, f := range r.Flags {
			rows = append(rows, []string{"", "", "", "", "note: " + f})
		}
	}
	if err := table(w, []string{"RECORD", "LOT", "SAMPLE", "VERDICT", "CHANGED LIMITS (OLD → NEW)"}, rows); err != nil {
		return err
	}
	verdicts, limits, failed := imp.Counts()
	_, err := fmt.Fprintf(w, "\nverdicts that change: %d of %d; records with changed limit results: %d; not re-run: %d\n",
		verdicts, len(imp.Rows), limits, failed)
	return err
}
