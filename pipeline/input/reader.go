package input

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"strconv"
	"strings"
	"unicode/utf8"

	"lotgate/steps"
)

// Defaults for the zero fields of Options.
const (
	defaultMaxBytes         = 256 << 20
	defaultSpacingTolerance = 0.01
	defaultMinPoints        = 16
)

// Options configure the reader; the zero value is usable.
type Options struct {
	// TimeColumn is the header name of the time column; "" means the first
	// column.
	TimeColumn string
	// SignalColumn is the header name of the signal column; "" means the
	// second column.
	SignalColumn string
	// TimeUnit is the unit of time when the header gives none: "min"
	// (default), "s", "ms" or "h".
	TimeUnit string
	// SignalUnit is the unit of signal when the header gives none ("" means
	// unknown).
	SignalUnit string
	// MaxBytes refuses larger files; 0 means 256 MiB.
	MaxBytes int64
	// SpacingTolerance is the allowed deviation of any sampling interval
	// from the mean interval, as a fraction of the mean; 0 means 0.01.
	SpacingTolerance float64
	// MinPoints is the fewest data rows accepted; 0 means 16.
	MinPoints int
}

// Data is a chromatogram read from a file.
type Data struct {
	// Trace holds the samples; Time is in minutes.
	Trace steps.Trace
	// Meta holds the metadata, keys normalised by NormalizeKey.
	Meta map[string]string
	// MetaOrder lists the keys of Meta in file order.
	MetaOrder []string
	// Separator is the column separator found in the header.
	Separator rune
}

// Error is a problem with the input, with its place.
type Error struct {
	// File is the path or name of the input.
	File string
	// Line is the 1-based line number, or 0 when the problem concerns the
	// whole file.
	Line int
	// Msg says what is wrong and, where useful, what to do.
	Msg string
	err error
}

// Error formats the problem as "FILE:LINE: MSG", or "FILE: MSG" without a
// line.
func (e *Error) Error() string {
	if e.Line == 0 {
		return e.File + ": " + e.Msg
	}
	return e.File + ":" + strconv.Itoa(e.Line) + ": " + e.Msg
}

// Unwrap returns the underlying I/O error, if any, so that callers can test
// for fs.ErrNotExist and the like.
func (e *Error) Unwrap() error { return e.err }

// ReadFile reads the data file at path. Its size is checked before it is
// read. Errors are *Error.
func ReadFile(path string, opt Options) (*Data, error) {
	o, err := opt.resolve(path)
	if err != nil {
		return nil, err
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, ioError(path, "cannot open the file", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, ioError(path, "cannot inspect the file", err)
	}
	if st.IsDir() {
		return nil, &Error{File: path, Msg: "is a directory, not a data file"}
	}
	if st.Size() > o.maxBytes {
		return nil, tooLarge(path, st.Size(), o.maxBytes)
	}
	buf, err := readAll(f, path, st.Size(), o.maxBytes)
	if err != nil {
		return nil, err
	}
	return parse(buf, path, o)
}

// Read reads a data file from r; name is used in errors. Reading stops with
// an error once more than the size limit has been read. Errors are *Error.
func Read(r io.Reader, name string, opt Options) (*Data, error) {
	o, err := opt.resolve(name)
	if err != nil {
		return nil, err
	}
	var hint int64
	if l, ok := r.(interface{ Len() int }); ok {
		hint = int64(l.Len()) // bytes.Reader, strings.Reader, bytes.Buffer
		if hint > o.maxBytes {
			return nil, tooLarge(name, hint, o.maxBytes)
		}
	}
	buf, err := readAll(r, name, hint, o.maxBytes)
	if err != nil {
		return nil, err
	}
	return parse(buf, name, o)
}

// NormalizeKey turns a metadata key into lower case with underscores: runs
// of characters other than ASCII letters and digits become one underscore,
// letters are lower-cased, and leading and trailing underscores are
// dropped. "Sample ID" gives "sample_id".
func NormalizeKey(k string) string {
	var b strings.Builder
	b.Grow(len(k))
	gap := false
	for i := 0; i < len(k); i++ {
		c := k[i]
		switch {
		case c >= 'A' && c <= 'Z':
			c += 'a' - 'A'
		case c >= 'a' && c <= 'z', c >= '0' && c <= '9':
		default:
			gap = true
			continue
		}
		if gap && b.Len() > 0 {
			b.WriteByte('_')
		}
		gap = false
		b.WriteByte(c)
	}
	return b.String()
}

// timeUnit is a unit of time and its conversion to minutes.
type timeUnit struct {
	name  string  // canonical name
	scale float64 // minutes = value*scale, or value/div
	div   float64
}

var (
	unitMin = timeUnit{name: "min", scale: 1}
	unitS   = timeUnit{name: "s", div: 60}
	unitMS  = timeUnit{name: "ms", div: 60000}
	unitH   = timeUnit{name: "h", scale: 60}
)

// timeUnits maps the accepted spellings, lower case, to their unit.
var timeUnits = map[string]timeUnit{
	"min": unitMin, "mins": unitMin, "minute": unitMin, "minutes": unitMin,
	"s": unitS, "sec": unitS, "secs": unitS, "second": unitS, "seconds": unitS,
	"ms": unitMS, "msec": unitMS, "msecs": unitMS, "millisecond": unitMS, "milliseconds": unitMS,
	"h": unitH, "hr": unitH, "hrs": unitH, "hour": unitH, "hours": unitH,
}

const timeUnitHelp = "use min, s, ms or h"

func lookupTimeUnit(s string) (timeUnit, bool) {
	u, ok := timeUnits[strings.ToLower(strings.TrimSpace(s))]
	return u, ok
}

// toMinutes converts a time in unit u to minutes.
func (u timeUnit) toMinutes(t float64) float64 {
	if u.div != 0 {
		return t / u.div
	}
	return t * u.scale
}

// resolved holds Options with the defaults filled in and checked.
type resolved struct {
	timeCol, signalCol string
	timeUnit           timeUnit
	signalUnit         string
	maxBytes           int64
	tol                float64
	minPoints          int
}

func (opt Options) resolve(name string) (resolved, error) {
	o := resolved{
		timeCol:    strings.TrimSpace(opt.TimeColumn),
		signalCol:  strings.TrimSpace(opt.SignalColumn),
		timeUnit:   unitMin,
		signalUnit: strings.TrimSpace(opt.SignalUnit),
		maxBytes:   opt.MaxBytes,
		tol:        opt.SpacingTolerance,
		minPoints:  opt.MinPoints,
	}
	bad := func(format string, a ...any) (resolved, error) {
		return resolved{}, &Error{File: name, Msg: "reader options: " + fmt.Sprintf(format, a...)}
	}
	if opt.TimeUnit != "" {
		u, ok := lookupTimeUnit(opt.TimeUnit)
		if !ok {
			return bad("unknown time unit %q; %s", opt.TimeUnit, timeUnitHelp)
		}
		o.timeUnit = u
	}
	switch {
	case o.maxBytes == 0:
		o.maxBytes = defaultMaxBytes
	case o.maxBytes < 0:
		return bad("size limit %d is negative", o.maxBytes)
	}
	switch {
	case o.tol == 0:
		o.tol = defaultSpacingTolerance
	case !(o.tol > 0) || math.IsInf(o.tol, 0):
		return bad("spacing tolerance %v must be a positive fraction such as 0.01", o.tol)
	}
	switch {
	case o.minPoints == 0:
		o.minPoints = defaultMinPoints
	case o.minPoints < 2:
		return bad("minimum number of points %d must be at least 2", o.minPoints)
	}
	return o, nil
}

func ioError(name, what string, err error) *Error {
	var pe *fs.PathError
	msg := err
	if errors.As(err, &pe) {
		msg = pe.Err
	}
	return &Error{File: name, Msg: what + ": " + msg.Error(), err: err}
}

// tooLarge reports a file over the size limit; size < 0 means unknown.
func tooLarge(name string, size, limit int64) *Error {
	what := "is"
	if size >= 0 {
		what = fmt.Sprintf("is %d bytes,", size)
	}
	return &Error{File: name, Msg: fmt.Sprintf(
		"%s over the size limit of %d bytes; raise the limit if this really is a data file", what, limit)}
}

// readAll reads r to the end, refusing more than limit bytes. hint is the
// expected size, 0 if unknown.
func readAll(r io.Reader, name string, hint, limit int64) ([]byte, error) {
	n := int64(64 << 10)
	if hint > 0 {
		n = hint + 1 // one more, to see EOF without growing
	}
	if n > limit {
		n = limit + 1
	}
	buf := make([]byte, 0, n)
	for {
		if len(buf) == cap(buf) {
			buf = append(buf, 0)[:len(buf)]
		}
		m, err := r.Read(buf[len(buf):cap(buf)])
		buf = buf[:len(buf)+m]
		if int64(len(buf)) > limit {
			return nil, tooLarge(name, -1, limit)
		}
		if err == io.EOF {
			return buf, nil
		}
		if err != nil {
			return nil, ioError(name, "cannot read the file", err)
		}
	}
}

// lineReader walks a buffer line by line, dropping line ends.
type lineReader struct {
	buf []byte
	pos int
	num int // number of the line last returned
}

// next returns the next line without its LF or CRLF.
func (l *lineReader) next() ([]byte, bool) {
	if l.pos >= len(l.buf) {
		return nil, false
	}
	rest := l.buf[l.pos:]
	line := rest
	if i := bytes.IndexByte(rest, '\n'); i >= 0 {
		line = rest[:i]
		l.pos += i + 1
	} else {
		l.pos = len(l.buf)
	}
	if n := len(line); n > 0 && line[n-1] == '\r' {
		line = line[:n-1]
	}
	l.num++
	return line, true
}

// nextRow returns the next line that is not blank.
func (l *lineReader) nextRow() ([]byte, bool) {
	for {
		line, ok := l.next()
		if !ok || !isBlank(line) {
			return line, ok
		}
	}
}

func isBlank(b []byte) bool {
	for _, c := range b {
		if c != ' ' && c != '\t' {
			return false
		}
	}
	return true
}

// trim drops spaces (and tabs, unless tab separates the cells) around a cell.
func trim(b []byte, sep byte) []byte {
	for len(b) > 0 && (b[0] == ' ' || (b[0] == '\t' && sep != '\t')) {
		b = b[1:]
	}
	for n := len(b); n > 0 && (b[n-1] == ' ' || (b[n-1] == '\t' && sep != '\t')); n-- {
		b = b[:n-1]
	}
	return b
}

// truncate shortens a cell for quoting in a message.
func truncate(b []byte) string {
	const keep = 40
	if len(b) <= keep {
		return string(b)
	}
	n := keep
	for n > 0 && !utf8.RuneStart(b[n]) {
		n--
	}
	return string(b[:n]) + "..."
}

// plural gives "1 cell" or "2 cells".
func plural(n int, what string) string {
	if n == 1 {
		return "1 " + what
	}
	return strconv.Itoa(n) + " " + what + "s"
}

// column is one header cell.
type column struct {
	index   int    // 0-based
	cell    string // as written, trimmed
	name    string // cell without its unit
	unit    string // the unit in () or [] at the end of the cell
	hasUnit bool
}

func (c column) String() string { return fmt.Sprintf("column %d %q", c.index+1, c.cell) }

func newColumn(index int, cell string) column {
	c := column{index: index, cell: cell, name: cell}
	n := len(cell)
	if n == 0 {
		return c
	}
	var open byte
	switch cell[n-1] {
	case ')':
		open = '('
	case ']':
		open = '['
	default:
		return c
	}
	if i := strings.LastIndexByte(cell[:n-1], open); i >= 0 {
		c.name = strings.TrimSpace(cell[:i])
		c.unit = strings.TrimSpace(cell[i+1 : n-1])
		c.hasUnit = true
	}
	return c
}

// parser holds the state of one read.
type parser struct {
	name string
	o    resolved
	lr   lineReader
}

func (p *parser) errf(line int, format string, a ...any) *Error {
	return &Error{File: p.name, Line: line, Msg: fmt.Sprintf(format, a...)}
}

func parse(buf []byte, name string, o resolved) (*Data, error) {
	p := &parser{name: name, o: o}
	switch {
	case bytes.HasPrefix(buf, []byte{0xEF, 0xBB, 0xBF}):
		buf = buf[3:]
	case bytes.HasPrefix(buf, []byte{0xFF, 0xFE}), bytes.HasPrefix(buf, []byte{0xFE, 0xFF}):
		return nil, p.errf(0, "the file is UTF-16 text; save it as UTF-8")
	}
	if len(buf) == 0 {
		return nil, p.errf(0, "the file is empty; expected metadata lines, a header line and data rows")
	}
	p.lr = lineReader{buf: buf}
	d := &Data{Meta: map[string]string{}}

	header, err := p.readMeta(d)
	if err != nil {
		return nil, err
	}
	headerLine := p.lr.num
	sep, cols, err := p.readHeader(header)
	if err != nil {
		return nil, err
	}
	d.Separator = rune(sep)
	tc, sc, err := p.pickColumns(cols)
	if err != nil {
		return nil, err
	}
	unit := p.o.timeUnit
	if tc.hasUnit {
		u, ok := lookupTimeUnit(tc.unit)
		if !ok {
			return nil, p.errf(headerLine, "unknown time unit %q in %v; %s", tc.unit, tc, timeUnitHelp)
		}
		unit = u
	}
	d.Trace.SignalUnit = p.o.signalUnit
	if sc.hasUnit {
		d.Trace.SignalUnit = sc.unit
	}

	rows := rowReader{p: p, sep: sep, tc: tc, sc: sc}
	rows.start = p.lr
	if err := rows.read(&d.Trace, headerLine); err != nil {
		return nil, err
	}
	if err := rows.checkAxis(&d.Trace, unit); err != nil {
		return nil, err
	}
	return d, nil
}

// readMeta reads the metadata and comment lines and returns the header line.
func (p *parser) readMeta(d *Data) ([]byte, error) {
	seen := map[string]int{}
	for lines := 0; ; lines++ {
		line, ok := p.lr.nextRow()
		if !ok {
			if lines == 0 {
				return nil, p.errf(0, "the file holds only blank lines; expected metadata lines, a header line and data rows")
			}
			return nil, p.errf(0, "no header line: the file ends after its metadata and comments")
		}
		if bytes.IndexByte(line, 0) >= 0 || !utf8.Valid(line) {
			return nil, p.errf(p.lr.num, "not a delimited text chromatogram: the line holds NUL bytes or is not UTF-8 text")
		}
		t := trim(line, 0)
		if t[0] != '#' {
			return line, nil
		}
		key, value, ok := strings.Cut(string(t[1:]), ":")
		if !ok {
			continue // a comment
		}
		k := NormalizeKey(key)
		if k == "" {
			return nil, p.errf(p.lr.num, "the metadata line has no key before the colon; write \"# key: value\", or drop the colon to make it a comment")
		}
		if first, dup := seen[k]; dup {
			return nil, p.errf(p.lr.num, "metadata key %q repeats the key on line %d", k, first)
		}
		seen[k] = p.lr.num
		d.Meta[k] = strings.TrimSpace(value)
		d.MetaOrder = append(d.MetaOrder, k)
	}
}

// readHeader detects the separator and splits the header into columns.
func (p *parser) readHeader(header []byte) (byte, []column, error) {
	line := p.lr.num
	if bytes.IndexByte(header, '\r') >= 0 {
		return 0, nil, p.errf(line, "the header holds a carriage return inside the line; end lines with LF or CRLF")
	}
	var sep byte
	switch {
	case bytes.IndexByte(header, '\t') >= 0:
		sep = '\t'
	case bytes.IndexByte(header, ';') >= 0:
		sep = ';'
	case bytes.IndexByte(header, ',') >= 0:
		sep = ','
	default:
		return 0, nil, p.errf(line, "the header %q has no tab, semicolon or comma between column names; name at least a time and a signal column",
			truncate(header))
	}
	var cols []column
	allNumbers := true
	for i, cell := range bytes.Split(header, []byte{sep}) {
		cell = trim(cell, sep)
		if _, err := parseNumber(cell, sep == ';'); err != nil {
			allNumbers = false
		}
		cols = append(cols, newColumn(i, string(cell)))
	}
	if allNumbers {
		return 0, nil, p.errf(line, "expected a header line naming the columns but found numbers; add a header such as \"time (min),signal (pA)\" above the data")
	}
	return sep, cols, nil
}

// pickColumns finds the time and signal columns. The header has at least
// two columns, as it holds a separator.
func (p *parser) pickColumns(cols []column) (tc, sc column, err error) {
	line := p.lr.num
	find := func(what, want string, dflt int) (column, error) {
		if want == "" {
			return cols[dflt], nil
		}
		var hits []column
		for _, c := range cols {
			if strings.EqualFold(c.cell, want) || strings.EqualFold(c.name, want) {
				hits = append(hits, c)
			}
		}
		switch len(hits) {
		case 1:
			return hits[0], nil
		case 0:
			names := make([]string, len(cols))
			for i, c := range cols {
				names[i] = strconv.Quote(c.cell)
			}
			return column{}, p.errf(line, "no %s column %q in the header; its columns are %s", what, want, strings.Join(names, ", "))
		default:
			return column{}, p.errf(line, "the %s column %q is ambiguous: it matches %v and %v", what, want, hits[0], hits[1])
		}
	}
	if tc, err = find("time", p.o.timeCol, 0); err != nil {
		return
	}
	if sc, err = find("signal", p.o.signalCol, 1); err != nil {
		return
	}
	if tc.index == sc.index {
		err = p.errf(line, "time and signal are both %v; name two different columns", tc)
	}
	return
}

// rowReader reads the data rows.
type rowReader struct {
	p      *parser
	start  lineReader // positioned before the first data row
	sep    byte
	tc, sc column
}

// read parses the data rows into tr in the file's time unit, checking that
// each time is greater than the one before.
func (r *rowReader) read(tr *steps.Trace, headerLine int) error {
	p, lr := r.p, &r.p.lr
	n := bytes.Count(lr.buf[lr.pos:], []byte{'\n'}) + 1
	tm := make([]float64, 0, n)
	sg := make([]float64, 0, n)
	ti, si := r.tc.index, r.sc.index
	last := max(ti, si)
	var prevText []byte
	prevLine := 0
	for {
		line, ok := lr.nextRow()
		if !ok {
			break
		}
		if trim(line, 0)[0] == '#' {
			return p.errf(lr.num, "a \"#\" line after the header; metadata and comments belong above the header")
		}
		tCell, sCell, cells := splitRow(line, r.sep, ti, si, last)
		if cells <= last {
			what, need := "signal", r.sc
			if ti > si {
				what, need = "time", r.tc
			}
			return p.errf(lr.num, "the row has %s separated by %s but the %s is in column %d; every row needs the header's columns",
				plural(cells, "cell"), sepName(r.sep), what, need.index+1)
		}
		tCell = trim(tCell, r.sep)
		t, err := r.number("time", tCell, r.tc)
		if err != nil {
			return err
		}
		s, err := r.number("signal", trim(sCell, r.sep), r.sc)
		if err != nil {
			return err
		}
		if len(tm) > 0 && !(t > tm[len(tm)-1]) {
			return p.errf(lr.num, "time %s is not greater than the time %s on line %d; times must strictly increase",
				truncate(tCell), truncate(prevText), prevLine)
		}
		prevText, prevLine = tCell, lr.num
		tm = append(tm, t)
		sg = append(sg, s)
	}
	switch {
	case len(tm) == 0:
		return p.errf(0, "no data rows after the header on line %d", headerLine)
	case len(tm) < p.o.minPoints:
		return p.errf(0, "only %s; at least %d are needed", plural(len(tm), "data row"), p.o.minPoints)
	}
	tr.Time, tr.Signal = tm, sg
	return nil
}

func sepName(sep byte) string {
	switch sep {
	case '\t':
		return "tabs"
	case ';':
		return "semicolons"
	}
	return "commas"
}

// splitRow returns cells ti and si of line and how many cells it saw,
// stopping after cell last.
func splitRow(line []byte, sep byte, ti, si, last int) (tCell, sCell []byte, cells int) {
	start := 0
	for col := 0; ; col++ {
		end := len(line)
		j := bytes.IndexByte(line[start:], sep)
		if j >= 0 {
			end = start + j
		}
		if col == ti {
			tCell = line[start:end]
		}
		if col == si {
			sCell = line[start:end]
		}
		if col == last || j < 0 {
			return tCell, sCell, col + 1
		}
		start = end + 1
	}
}

// number parses the trimmed cell of column c on the current line.
func (r *rowReader) number(what string, cell []byte, c column) (float64, error) {
	f, err := parseNumber(cell, r.sep == ';')
	if err == nil && !math.IsNaN(f) && !math.IsInf(f, 0) {
		return f, nil
	}
	p := r.p
	switch {
	case len(cell) == 0:
		return 0, p.errf(p.lr.num, "the %s cell is empty (%v)", what, c)
	case err == strconv.ErrRange:
		return 0, p.errf(p.lr.num, "%s %s is out of range; only finite numbers are accepted", what, truncate(cell))
	case err != nil:
		return 0, p.errf(p.lr.num, "the %s cell %q is not a number (%v)", what, truncate(cell), c)
	case math.IsNaN(f):
		return 0, p.errf(p.lr.num, "%s is NaN; only finite numbers are accepted", what)
	}
	return 0, p.errf(p.lr.num, "%s is %+g; only finite numbers are accepted", what, f)
}

// row finds data row k again and returns its line number and time cell.
func (r *rowReader) row(k int) (int, string) {
	lr := r.start
	for i := 0; ; i++ {
		line, _ := lr.nextRow()
		if i == k {
			tCell, _, _ := splitRow(line, r.sep, r.tc.index, r.tc.index, r.tc.index)
			return lr.num, truncate(trim(tCell, r.sep))
		}
	}
}

// checkAxis converts the times to minutes and checks that they still
// increase and are evenly spaced.
func (r *rowReader) checkAxis(tr *steps.Trace, unit timeUnit) error {
	p, t := r.p, tr.Time
	if unit != unitMin {
		for i, v := range t {
			m := unit.toMinutes(v)
			if math.IsInf(m, 0) {
				line, text := r.row(i)
				return p.errf(line, "time %s %s is too large to express in minutes", text, unit.name)
			}
			if i > 0 && !(m > t[i-1]) {
				line, text := r.row(i)
				_, prev := r.row(i - 1)
				return p.errf(line, "times %s and %s %s are too close together to tell apart in minutes", prev, text, unit.name)
			}
			t[i] = m
		}
	}
	mean := tr.Interval()
	if math.IsInf(mean, 0) || math.IsInf(t[len(t)-1]-t[0], 0) {
		return p.errf(0, "the time axis from %g to %g min spans more than a float64 can hold", t[0], t[len(t)-1])
	}
	lim := p.o.tol * mean
	first, firstDev, worst, worstDev := 0, 0.0, 0, 0.0
	for i := 1; i < len(t); i++ {
		dev := math.Abs(t[i] - t[i-1] - mean)
		if dev <= lim {
			continue
		}
		if first == 0 {
			first, firstDev = i, dev
		}
		if dev > worstDev {
			worst, worstDev = i, dev
		}
	}
	if first == 0 {
		return nil
	}
	line, text := r.row(first)
	prevLine, prev := r.row(first - 1)
	// A single gap shifts the mean so that every interval may be off; then
	// the first offender is not where the gap is, so name that place too.
	where := ""
	if worstDev > 1.5*firstDev {
		worstLine, _ := r.row(worst)
		where = fmt.Sprintf(" (the largest deviation is at line %d)", worstLine)
	}
	return p.errf(line, "the interval from time %s (line %d) to %s is %.6g %s but the mean interval is %.6g %s, and intervals may differ from it by %g %%%s; "+
		"the times must be evenly spaced: look for missing or repeated rows, or write the times with more digits",
		prev, prevLine, text, unit.fromMinutes(t[first]-t[first-1]), unit.name, unit.fromMinutes(mean), unit.name, p.o.tol*100, where)
}

// fromMinutes converts a time in minutes to unit u, for messages.
func (u timeUnit) fromMinutes(m float64) float64 {
	if u.div != 0 {
		return m * u.div
	}
	return m / u.scale
}
