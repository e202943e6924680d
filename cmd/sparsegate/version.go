package main

import (
	"fmt"
	"runtime"

	"sparsegate/harness/version"
)

const versionUsage = `usage: sparsegate version

Print the sparsegate version, the Go version it was built with and the
platform.

flags: none

example:
  sparsegate version
`

func runVersion(c *cli, args []string) error {
	if len(args) == 1 && isHelpFlag(args[0]) {
		fmt.Fprint(c.stderr, versionUsage)
		return nil
	}
	if len(args) > 0 {
		return usageError("version", "takes no arguments")
	}
	_, err := fmt.Fprintf(c.stdout, "sparsegate %s (%s, %s/%s)\n", version.Version, runtime.Version(), runtime.GOOS, runtime.GOARCH)
	return err
}
