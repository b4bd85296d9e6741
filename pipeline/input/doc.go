// Package input reads chromatogram data files into a [steps.Trace].
//
// # Delimited text chromatogram format
//
// A data file is UTF-8 text in three parts: optional metadata lines, one
// header line, and data rows.
//
//	# Sample ID: LOT-2291-A
//	# Injection time: 2024-05-06T09:41:00Z
//	# exported by the instrument PC
//	time (min);FID [pA];oven [°C]
//	0,000;12,51;40,0
//	0,005;12,49;40,0
//	...
//
// General rules:
//
//   - An optional UTF-8 byte-order mark may open the file. UTF-16 files are
//     refused; save them as UTF-8.
//   - Lines end with LF or CRLF. Blank lines are ignored anywhere.
//   - Files larger than the size limit (256 MiB by default) are refused
//     before they are read.
//
// Metadata lines come before the header and have the form "# key: value".
// The key is normalised by [NormalizeKey]: trimmed, lower-cased, every run of
// characters other than a–z and 0–9 turned into one underscore, and leading
// and trailing underscores dropped, so "Sample ID" becomes "sample_id". The
// value is trimmed. A key may appear only once. A "#" line without a colon is
// a comment and is ignored. "#" lines after the header are refused.
//
// The header is the first line that is neither blank nor a "#" line. It
// names the columns and sets the separator: a tab if the header holds one,
// otherwise a semicolon, otherwise a comma. Every data row uses the same
// separator. Values are not quoted. A column name may carry its unit in
// parentheses or brackets at its end: "time (min)", "Time [s]",
// "signal (pA)", "FID [mV]".
//
// Columns: by default the first column is the time and the second the
// signal; [Options] may name other columns instead (matched case-insensitively
// against the full header cell or its name without the unit). Further columns
// are allowed and ignored.
//
// Units: the time unit is taken from the time column's header, else from
// [Options], else minutes. Accepted time units are min, s, ms and h (also
// spelt out: "minutes", "sec", "seconds", "hours", ...; case does not
// matter). Times are converted to minutes. The signal unit is taken from the
// signal column's header, else from Options, else left unknown.
//
// Data rows: the time and signal cells must hold finite decimal numbers
// ("12.5", "-3", "1.25e-3"; NaN and infinities are refused). Spaces around a
// cell are ignored. With a semicolon separator a decimal comma ("1,25") is
// accepted as well as a decimal point; with a comma separator only the
// decimal point is.
//
// Time axis: times must strictly increase from row to row and be evenly
// spaced: every interval between neighbouring rows may differ from the mean
// interval by at most a tolerance (1 % of the mean by default). A file must
// have at least a minimum number of rows (16 by default).
//
// Every problem is reported as one [Error] naming the file, the line and what
// is wrong.
package input
