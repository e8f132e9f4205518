package kernel

import (
	"fmt"
	"strings"
)

// TerminalSafe returns s with every control character other than line
// breaks and tabs (the ESC of a colour or cursor sequence, a carriage return,
// C1 controls) written as a visible \x.. escape, so text from data cannot
// drive the terminal it is printed on.
func TerminalSafe(s string) string {
	clean := true
	for _, r := range s {
		if unsafeControl(r) {
			clean = false
			break
		}
	}
	if clean {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		if unsafeControl(r) {
			fmt.Fprintf(&b, `\x%02x`, r)
			continue
		}
		b.WriteRune(r)
	}
	return b.String()
}

func unsafeControl(r rune) bool {
	return (r < 0x20 && r != '\n' && r != '\t') || r == 0x7f || (r >= 0x80 && r < 0xa0)
}
