package widgets

import (
	"html"
	"html/template"
	"regexp"
	"strings"
)

// Hinter is implemented by errors that know what the user should do next.
// ErrorPanel shows the hint under the message.
type Hinter interface {
	Hint() string
}

const defaultHint = "Check the column, row or setting named above, fix it, and run the cell again."

// ErrorHint returns the hint shown with err: its own (see Hinter) or a
// general one.
func ErrorHint(err error) string {
	if err == nil {
		return ""
	}
	if h, ok := err.(Hinter); ok {
		if s := strings.TrimSpace(h.Hint()); s != "" {
			return s
		}
	}
	return defaultHint
}

// ErrorMessage returns err's message without anything that looks like a
// goroutine dump, trimmed of trailing blank lines. Line breaks are kept.
func ErrorMessage(err error) string {
	if err == nil {
		return ""
	}
	msg := err.Error()
	if i := strings.Index(msg, "\ngoroutine "); i >= 0 {
		msg = msg[:i]
	}
	if strings.HasPrefix(msg, "goroutine ") {
		msg = "internal error (details withheld)"
	}
	msg = strings.TrimRight(msg, " \t\r\n")
	if msg == "" {
		msg = "unknown error (the error carried no message)"
	}
	return msg
}

// ErrorText is the terminal form of an error panel.
func ErrorText(err error) string {
	if err == nil {
		return ""
	}
	return "error: " + ErrorMessage(err) + "\nhint: " + ErrorHint(err)
}

// ErrorMarker is the attribute that marks an error panel: a result that
// failed. A finding shown in the same style (a separation panel, a failed
// optional part of a report) does not carry it. `counterpart run` counts a
// cell whose output holds a marked panel as failed (see ErrorPanelMessages).
const ErrorMarker = "data-counterpart-error"

var errorTemplate = template.Must(template.New("error").Parse(
	`<div class="cp-error" role="alert" ` + ErrorMarker + `>` +
		`<div class="cp-error-title">Error</div>` +
		`<div class="cp-error-msg" style="white-space:pre-wrap">{{.Message}}</div>` +
		`<div class="cp-hint">{{.Hint}}</div>` +
		`</div>`))

// ErrorPanel shows err as a readable panel: the message escaped, its line
// breaks kept, and a hint line under it. It never shows a stack trace. A nil
// error gives the empty string.
func ErrorPanel(err error) string {
	if err == nil {
		return ""
	}
	var b strings.Builder
	if e := errorTemplate.Execute(&b, struct{ Message, Hint string }{ErrorMessage(err), ErrorHint(err)}); e != nil {
		return `<div class="cp-error" role="alert" ` + ErrorMarker + `><div class="cp-error-msg">` + template.HTMLEscapeString(ErrorMessage(err)) + `</div></div>`
	}
	return b.String()
}

// errorPanelMsg finds the message of each marked error panel in a page.
var errorPanelMsg = regexp.MustCompile(`<div class="cp-error"[^>]*\s` + ErrorMarker + `[^>]*>(?:<div class="cp-error-title">[^<]*</div>)?<div class="cp-error-msg"[^>]*>([^<]*)</div>`)

// ErrorPanelMessages returns the messages (unescaped) of the error panels
// in html, in order: none when it shows no failed result.
func ErrorPanelMessages(h string) []string {
	var out []string
	for _, m := range errorPanelMsg.FindAllStringSubmatch(h, -1) {
		out = append(out, html.UnescapeString(m[1]))
	}
	return out
}

// PartFailedPanel shows that an optional part of a larger result (a
// report's bootstrap) failed, and why, in the error panel's style but
// without ErrorMarker: the whole was built and the cell did not fail.
func PartFailedPanel(part string, why string) string {
	return `<div class="cp-error" role="note"><div class="cp-error-title">` + template.HTMLEscapeString(part) + ` failed</div>` +
		`<div class="cp-error-msg" style="white-space:pre-wrap">` + template.HTMLEscapeString(why) + `</div>` +
		`<div class="cp-hint">The rest of the report does not depend on it.</div></div>`
}
