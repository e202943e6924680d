package suites

import (
	"fmt"
	"io/fs"
	"os"
	"slices"

	"sparsegate/suites/demo"
)

// Builtin lists the built-in suite names.
func Builtin() []string { return []string{"demo"} }

// LoadBuiltin loads a built-in suite by name from the files embedded in the
// binary.
func LoadBuiltin(name string) (*Suite, error) {
	if !slices.Contains(Builtin(), name) {
		return nil, fmt.Errorf("no built-in suite %q; built-in suites are %v", name, Builtin())
	}
	fsys := demo.FS()
	data, err := fs.ReadFile(fsys, "suite.yaml")
	if err != nil {
		return nil, fmt.Errorf("internal: the built-in suite %q is missing: %w", name, err)
	}
	return Parse("builtin:"+name+"/suite.yaml", data, fsys, nil)
}

// Resolve loads a suite named on the command line: a file when one exists at
// that path, else a built-in suite of that name (a directory of that name,
// such as the demo's own source directory, does not hide the built-in).
func Resolve(arg string) (*Suite, error) {
	if st, err := os.Stat(arg); (err == nil && !st.IsDir()) || !slices.Contains(Builtin(), arg) {
		return Load(arg)
	}
	return LoadBuiltin(arg)
}
