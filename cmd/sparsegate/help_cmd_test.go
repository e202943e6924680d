package main

import (
	"regexp"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// Every command's --help and 'help COMMAND' exit 0 and print the same text:
// a usage line, a flags section and an example command line.
func TestEveryCommandHasHelp(t *testing.T) {
	for _, c := range commands() {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := sparsegate(t, "help", c.name)
			require.Equal(t, 0, code, errs)
			require.True(t, strings.HasPrefix(out, "usage: sparsegate "+c.name), "help %s starts %q", c.name, firstLine(out))
			// A flags section: "flags:" followed by flag lines, or "flags: none".
			require.Regexp(t, `(?m)^flags:( none)?$`, out)
			if !strings.Contains(out, "flags: none") {
				require.Regexp(t, `(?m)^flags:\n(\s+--[a-z]|.*\n)*\s+--[a-z][a-z-]+`, out)
			}
			// An example section whose lines run this command.
			require.Regexp(t, `(?m)^examples?:\n  sparsegate `+regexp.QuoteMeta(c.name)+`\b`, out)

			code, hout, herrs := sparsegate(t, c.name, "--help")
			require.Equal(t, 0, code, hout+herrs)
			require.Equal(t, out, hout+herrs, "%s --help differs from help %s", c.name, c.name)
			code, hout, herrs = sparsegate(t, c.name, "-h")
			require.Equal(t, 0, code, hout+herrs)
			require.Equal(t, out, hout+herrs)
		})
	}
}

// Every flag a command's usage shows in its synopsis line is documented in
// its flags section.
func TestUsageSynopsisFlagsAreDocumented(t *testing.T) {
	flag := regexp.MustCompile(`--[a-z][a-z-]*`)
	for _, c := range commands() {
		synopsis, rest, _ := strings.Cut(c.usage, "\n")
		_, section, ok := strings.Cut(rest, "\nflags:")
		if !ok {
			t.Errorf("%s: no flags section", c.name)
			continue
		}
		section, _, _ = strings.Cut(section, "\nexample")
		for _, f := range flag.FindAllString(synopsis, -1) {
			require.Contains(t, section, f, "%s: the synopsis names %s but the flags section does not", c.name, f)
		}
	}
}

func TestHelpBadUsage(t *testing.T) {
	code, _, errs := sparsegate(t, "help", "frob")
	require.Equal(t, 2, code)
	require.Contains(t, errs, `unknown command "frob"`)
	code, _, errs = sparsegate(t, "help", "run", "bisect")
	require.Equal(t, 2, code)
	require.Contains(t, errs, "at most one command")
	code, _, errs = sparsegate(t, "version", "now")
	require.Equal(t, 2, code)
	require.Contains(t, errs, "takes no arguments")
}

func firstLine(s string) string {
	l, _, _ := strings.Cut(s, "\n")
	return l
}
