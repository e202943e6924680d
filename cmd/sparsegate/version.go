package main

import (
	"fmt"
	"runtime"

	"sparsegate/harness/version"
)

func runVersion(c *cli, args []string) error {
	if len(args) > 0 {
		return usageError("version", "takes no arguments")
	}
	_, err := fmt.Fprintf(c.stdout, "sparsegate %s (%s, %s/%s)\n", version.Version, runtime.Version(), runtime.GOOS, runtime.GOARCH)
	return err
}
