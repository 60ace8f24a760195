package jobs

import (
	"errors"
	"regexp"
	"strings"
	"unicode/utf8"

	"kelvard/store"
)

// maxErrorText caps the error text written to job_runs.
const maxErrorText = 300

var (
	// credentialsInURL matches the user:password@ part of a URL.
	credentialsInURL = regexp.MustCompile(`(?i)\b([a-z][a-z0-9+.-]*://)[^\s/@:]+:[^\s/@]*@`)
	// secretSetting matches key=value settings that carry a secret.
	secretSetting = regexp.MustCompile(`(?i)\b(password|passwd|pwd|secret|token|apikey|api_key)=\S+`)
	// sqlStatement matches the start of an SQL statement quoted in an
	// error.
	sqlStatement = regexp.MustCompile(`(?is)\b(select\s.+\sfrom|insert\s+into|update\s+\S+\s+set|delete\s+from|with\s+\S+\s+as\s*\()\b`)
)

// errorText turns a job's error into the short, plain text kept on its
// job_runs row and shown by the API: one line, credentials and quoted SQL
// removed, at most maxErrorText bytes. The full error goes to the log.
func errorText(err error) string {
	if err == nil {
		return ""
	}
	if errors.Is(err, store.ErrUnavailable) {
		return "the database is unavailable"
	}
	text := strings.Join(strings.Fields(err.Error()), " ")
	text = credentialsInURL.ReplaceAllString(text, "${1}…@")
	text = secretSetting.ReplaceAllString(text, "${1}=…")
	if loc := sqlStatement.FindStringIndex(text); loc != nil {
		text = strings.TrimRight(text[:loc[0]], " :") + " (database statement omitted)"
	}
	return shorten(text, maxErrorText)
}

// shorten cuts s to at most n bytes on a rune boundary, marking the cut.
func shorten(s string, n int) string {
	if len(s) <= n {
		return s
	}
	const mark = "…"
	cut := n - len(mark)
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return s[:cut] + mark
}
