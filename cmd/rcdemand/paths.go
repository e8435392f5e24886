package main

import (
	"path/filepath"

	"rcdemand/data"
	"rcdemand/demand"
)

// errInterrupted is what a command returns when the user pressed Ctrl-C.
var errInterrupted = demand.ErrInterrupted

// sibling returns name in the folder of path.
func sibling(path, name string) string { return filepath.Join(filepath.Dir(path), name) }

// tableFlag checks the format of a table output flag (.csv or .parquet)
// before any work: an unknown extension is a usage error.
func tableFlag(flag, path string) error {
	if path == "" {
		return nil
	}
	if _, err := data.TableFormat(path); err != nil {
		return usagef("%s %v", flag, err)
	}
	return nil
}

// checkOutputs checks, before any work, that each output path given ("" is
// none) can be written and is not one of inputs: a command fails at once
// rather than after its computation, and writes nothing.
func checkOutputs(inputs []string, outs ...string) error {
	for _, out := range outs {
		if out == "" {
			continue
		}
		if err := data.CheckOutput(out, inputs); err != nil {
			return err
		}
	}
	return nil
}
