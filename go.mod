module github.com/plumbref/plumb

go 1.25.0

require (
	github.com/google/go-cmp v0.7.0 // indirect
	github.com/stretchr/testify v1.12.1 // indirect
	go.yaml.in/yaml/v3 v3.0.5 // indirect
	gonum.org/v1/gonum v0.17.0 // indirect
)
