package watch

import (
	"fmt"
	"path/filepath"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// temporaryExts are the endings copy, download and editing tools give a
// file while they write it.
var temporaryExts = []string{".tmp", ".temp", ".part", ".partial", ".crdownload", ".download", ".filepart", ".swp", ".swx"}

// ignoredName reports names the watcher leaves alone until they are
// renamed: hidden files, names starting or ending with "~" (backup and lock
// files), and temporary endings such as ".tmp" and ".part".
func ignoredName(name string) bool {
	if strings.HasPrefix(name, ".") || strings.HasPrefix(name, "~") || strings.HasSuffix(name, "~") {
		return true
	}
	ext := strings.ToLower(filepath.Ext(name))
	for _, t := range temporaryExts {
		if ext == t {
			return true
		}
	}
	return false
}

// displayName is the name as written in the ledger and the record: the file
// name with any invalid UTF-8 replaced.
func displayName(raw string) string { return strings.ToValidUTF8(raw, "\uFFFD") }

// maxItemName keeps "ITEM-NAME.reason.txt" within the 255 bytes most file
// systems allow.
const maxItemName = 230

// itemName is an item's file name in the work, archive and quarantine
// folders: its number, a dash and its inbox name (shortened if too long).
func itemName(id int64, file string) string {
	prefix := strconv.FormatInt(id, 10) + "-"
	return prefix + cut(file, maxItemName-len(prefix))
}

// cut shortens s to at most n bytes at a character boundary.
func cut(s string, n int) string {
	if len(s) <= n {
		return s
	}
	for n > 0 && !utf8.RuneStart(s[n]) {
		n--
	}
	return s[:n]
}

// outputStem names an item's documents: the input's name without its
// extension, reduced to letters, digits and "-_.+" (no path separators, no
// "..", no leading dot or dash), then the first 12 hex digits of the input's
// SHA-256 and the first 8 of the pipeline's (or bundle's) digest. The same
// input under the same pipeline always gets the same name.
func outputStem(file, inputSHA, pipelineSHA string) string {
	stem := strings.TrimSuffix(file, filepath.Ext(file))
	var b strings.Builder
	under := false
	for _, r := range stem {
		ok := unicode.IsLetter(r) || unicode.IsDigit(r) || strings.ContainsRune("-_.+", r)
		if ok && r != '_' {
			b.WriteRune(r)
			under = false
		} else if !under {
			b.WriteByte('_')
			under = true
		}
	}
	s := b.String()
	for strings.Contains(s, "..") {
		s = strings.ReplaceAll(s, "..", ".")
	}
	s = strings.Trim(cut(strings.Trim(s, "._-+"), 80), "._-+")
	if s == "" {
		s = "data"
	}
	return fmt.Sprintf("%s-%s-%s", s, inputSHA[:12], pipelineSHA[:8])
}

// oneLine turns a message into one line of printable text: line breaks
// become "; " and other control characters (a newline in a file name, say)
// become "?".
func oneLine(s string) string {
	s = strings.Join(strings.FieldsFunc(s, func(r rune) bool { return r == '\n' || r == '\r' }), "; ")
	return strings.Map(func(r rune) rune {
		if unicode.IsControl(r) {
			return '?'
		}
		return r
	}, s)
}

// linkReason says why a symbolic link found in the inbox is refused.
func linkReason(inbox, file, target string) string {
	abs := target
	if !filepath.IsAbs(abs) {
		abs = filepath.Join(inbox, abs)
	}
	rel, err := filepath.Rel(inbox, filepath.Clean(abs))
	if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
		return oneLine(fmt.Sprintf("%s: symbolic link to %q, outside the inbox; links are not followed: copy the data file itself into the inbox", file, target))
	}
	return oneLine(fmt.Sprintf("%s: symbolic link to %q; links are not followed, even inside the inbox: drop the data file itself", file, target))
}
