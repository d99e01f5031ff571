package raster

import (
	"fmt"
	"strconv"
	"strings"
)

// nameSeparators separate the words of a file stem ("LC08_L1TP_..._B1").
const nameSeparators = "_-."

// stemParts splits file stems into what they share and what tells them
// apart: for "LC08_L1TP_195025_20130707_20170503_01_T1_B1" ...
// "..._T1_B7" it gives common "LC08_L1TP_195025_20130707_20170503_01_T1"
// and parts "B1" ... "B7". The shared head and tail end and start at a
// separator (_ - .), so a differing part is whole words ("B1", not "1"),
// and the separators at the joint are dropped. ok is false when there are
// fewer than two stems or the parts are not distinct and non-empty.
func stemParts(stems []string) (common string, parts []string, ok bool) {
	if len(stems) < 2 {
		return "", nil, false
	}
	head := stems[0]
	for _, s := range stems[1:] {
		head = head[:commonPrefix(head, s)]
	}
	// Back up to the end of a word: the head is kept only up to its last
	// separator, unless it ends where every stem has a separator next.
	if !allFollowedBySeparator(stems, len(head)) {
		head = head[:strings.LastIndexAny(head, nameSeparators)+1]
	}
	rest := make([]string, len(stems))
	for i, s := range stems {
		rest[i] = s[len(head):]
	}
	tail := rest[0]
	for _, r := range rest[1:] {
		tail = tail[len(tail)-commonSuffix(tail, r):]
	}
	// Move forward to the start of a word: the tail must start with a
	// separator, or with the start of a word in every stem.
	if !allPrecededBySeparator(rest, len(tail)) {
		if i := strings.IndexAny(tail, nameSeparators); i >= 0 {
			tail = tail[i:]
		} else {
			tail = ""
		}
	}
	parts = make([]string, len(stems))
	seen := map[string]bool{}
	for i, r := range rest {
		p := strings.Trim(r[:len(r)-len(tail)], nameSeparators)
		if p == "" || seen[p] {
			return "", nil, false
		}
		seen[p] = true
		parts[i] = p
	}
	h, t := strings.TrimRight(head, nameSeparators), strings.TrimLeft(tail, nameSeparators)
	switch {
	case h == "":
		common = t
	case t == "":
		common = h
	default:
		// Keep the separator that led into the tail.
		common = h + tail[:len(tail)-len(t)][:1] + t
	}
	return common, parts, true
}

func commonPrefix(a, b string) int {
	n := 0
	for n < len(a) && n < len(b) && a[n] == b[n] {
		n++
	}
	return n
}

func commonSuffix(a, b string) int {
	n := 0
	for n < len(a) && n < len(b) && a[len(a)-1-n] == b[len(b)-1-n] {
		n++
	}
	return n
}

// allFollowedBySeparator reports whether the byte at i of every stem is a
// separator (so stems[k][:i] ends a word in each).
func allFollowedBySeparator(stems []string, i int) bool {
	if i == 0 {
		return true
	}
	for _, s := range stems {
		if i >= len(s) || !strings.ContainsRune(nameSeparators, rune(s[i])) {
			return false
		}
	}
	return true
}

// allPrecededBySeparator reports whether the last n bytes of every string
// start a word: each is preceded by a separator.
func allPrecededBySeparator(rest []string, n int) bool {
	if n == 0 {
		return true
	}
	for _, r := range rest {
		i := len(r) - n - 1
		if i < 0 || !strings.ContainsRune(nameSeparators, rune(r[i])) {
			return false
		}
	}
	return true
}

// bandRange writes band names compactly: runs of names that share a prefix
// and count up by one ("B1", "B2", "B3"; "B09", "B10") become "B1-B3";
// runs are joined with commas ("B1-B5,B7,QA_PIXEL").
func bandRange(names []string) string {
	var out []string
	for i := 0; i < len(names); {
		j := i
		if pre, n, pad, ok := splitNumber(names[i]); ok {
			for j+1 < len(names) && names[j+1] == fmt.Sprintf("%s%0*d", pre, pad, n+j+1-i) {
				j++
			}
		}
		if j > i {
			out = append(out, names[i]+"-"+names[j])
		} else {
			out = append(out, names[i])
		}
		i = j + 1
	}
	return strings.Join(out, ",")
}

// splitNumber splits "B10" into "B" and 10, and "B09" into "B", 9 and the
// zero-padded width 2; ok is false without trailing digits.
func splitNumber(s string) (prefix string, n, pad int, ok bool) {
	i := len(s)
	for i > 0 && s[i-1] >= '0' && s[i-1] <= '9' {
		i--
	}
	digits := s[i:]
	if digits == "" || len(digits) > 9 {
		return "", 0, 0, false
	}
	n, _ = strconv.Atoi(digits)
	if digits[0] == '0' {
		pad = len(digits)
	}
	return s[:i], n, pad, true
}

// stackLabel names a stack for people: the shared part of the stems and the
// range of band names when the files are single bands told apart by their
// names, else the file stems joined with commas.
func stackLabel(common string, names []string, paths []string) string {
	if names != nil {
		if common == "" {
			return bandRange(names)
		}
		return fmt.Sprintf("%s [%s]", common, bandRange(names))
	}
	stems := make([]string, len(paths))
	for i, p := range paths {
		stems[i] = Stem(p)
	}
	return strings.Join(stems, ",")
}
