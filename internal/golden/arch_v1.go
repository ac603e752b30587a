//go:build amd64 && !amd64.v2 && !amd64.v3 && !amd64.v4

package golden

// tablesMeasuredHere: the accuracy tables are measured on amd64 built for
// GOAMD64=v1, the build CI runs. Builds that fuse multiply-adds (GOAMD64=v3,
// arm64, ppc64le, s390x) or whose math library differs can move a table's
// second digit; their golden bounds are still checked, the tables are not.
const tablesMeasuredHere = true
