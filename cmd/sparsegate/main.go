// Command sparsegate gates releases of sparsified transformer language models:
// it runs probe suites on its own CPU inference engine against dense and
// sparse builds, compares the results with golden files, and reports.
//
// Run `sparsegate help` for the commands.
package main

import "os"

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
