package main

import (
	"path/filepath"

	"rcdemand/demand"
)

// errInterrupted is what a command returns when the user pressed Ctrl-C.
var errInterrupted = demand.ErrInterrupted

// sibling returns name in the folder of path.
func sibling(path, name string) string { return filepath.Join(filepath.Dir(path), name) }

// relativeTo returns target relative to the folder of from (for references
// between output files), or target itself.
func relativeTo(target, from string) string {
	a, err1 := filepath.Abs(target)
	b, err2 := filepath.Abs(filepath.Dir(from))
	if err1 != nil || err2 != nil {
		return target
	}
	if rel, err := filepath.Rel(b, a); err == nil {
		return filepath.ToSlash(rel)
	}
	return target
}
