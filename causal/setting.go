package causal

import (
	"errors"
	"fmt"
	"strings"
)

// SettingError is an error whose fix is a setting of the Study, such as
// DropIncomplete or TreatedLevel. Its message names the setting as the Study
// method that changes it (".DropIncomplete()"); a front end that offers the
// same setting under another name (the counterpart command's
// --drop-incomplete) recognises the error with errors.As and rephrases it
// with Phrase, so its users read the names they type.
type SettingError struct {
	// Setting is the Study method that fixes the problem: "Treat",
	// "TreatedLevel", "Outcome", "Adjust", "DropIncomplete" or "AsCategory".
	Setting string
	// Value is the argument suggested for the setting ("" for none, or for
	// a setting that takes no argument).
	Value string
	// Before and After are the message around the named setting.
	Before, After string
}

func (e *SettingError) Error() string { return e.Phrase(MethodName) }

// Phrase writes the message with the setting named by name(setting, value).
func (e *SettingError) Phrase(name func(setting, value string) string) string {
	return e.Before + name(e.Setting, e.Value) + e.After
}

// MethodName names a setting as the Study method call that makes it:
// .DropIncomplete(), .TreatedLevel("yes"); with an empty value for a
// setting that takes one, .TreatedLevel.
func MethodName(setting, value string) string {
	switch {
	case setting == "DropIncomplete":
		return ".DropIncomplete()"
	case value == "":
		return "." + setting
	}
	return fmt.Sprintf(".%s(%s)", setting, quoteValue(value))
}

// settingErr builds a SettingError: the message is before, the setting, after.
func settingErr(setting, value, before, after string) error {
	return &SettingError{Setting: setting, Value: value, Before: before, After: after}
}

// RephraseSettings returns err's message with the setting of every
// SettingError in its chain named by name, keeping the words that wrap it.
func RephraseSettings(err error, name func(setting, value string) string) string {
	if err == nil {
		return ""
	}
	msg := err.Error()
	var se *SettingError
	if errors.As(err, &se) {
		return strings.Replace(msg, se.Error(), se.Phrase(name), 1)
	}
	return msg
}
