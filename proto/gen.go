// Package proto holds goniod's public API definitions; the generated Go code lives in proto/goniod/v1.
//
// Regenerate with `go generate ./proto/...` (needs protoc from Debian's protobuf-compiler; the Go plugins are
// pinned as tools in go.mod and run through `go tool`).
package proto

//go:generate ./gen.sh
