module sparsegate

go 1.26.0

require (
	github.com/google/go-cmp v0.7.0
	github.com/sergi/go-diff v1.4.0
	github.com/spf13/pflag v1.1.0
	github.com/stretchr/testify v1.12.1
	go.yaml.in/yaml/v3 v3.0.5
	golang.org/x/sys v0.50.0
)

require github.com/joshdk/go-junit v1.0.0
