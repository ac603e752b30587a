//go:build !amd64 || amd64.v2 || amd64.v3 || amd64.v4

package golden

// tablesMeasuredHere: see arch_v1.go.
const tablesMeasuredHere = false
