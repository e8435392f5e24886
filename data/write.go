package data

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
)

var (
	tempMu sync.Mutex
	temps  = map[string]bool{}
)

// RemoveTemporaries deletes the temporary files of writes still in progress.
// The command line calls it when interrupted, so nothing partial is left.
func RemoveTemporaries() {
	tempMu.Lock()
	defer tempMu.Unlock()
	for p := range temps {
		os.Remove(p)
		delete(temps, p)
	}
}

// SamePath reports whether a and b name the same file (after cleaning, or by
// identity when both exist).
func SamePath(a, b string) bool {
	aa, err1 := filepath.Abs(a)
	bb, err2 := filepath.Abs(b)
	if err1 == nil && err2 == nil && aa == bb {
		return true
	}
	fa, err1 := os.Stat(a)
	fb, err2 := os.Stat(b)
	return err1 == nil && err2 == nil && os.SameFile(fa, fb)
}

// refuseInput returns an error when path is one of inputs ("" entries are
// ignored).
func refuseInput(path string, inputs []string) error {
	for _, in := range inputs {
		if in != "" && SamePath(path, in) {
			return fmt.Errorf("%s: refusing to write an output over an input file", path)
		}
	}
	return nil
}

// CheckOutput reports, before any work is done, why WriteAtomic could not
// write path: it is one of inputs, or a folder, or its folder cannot be
// created or written to. It creates nothing and leaves nothing behind.
func CheckOutput(path string, inputs []string) error {
	if err := refuseInput(path, inputs); err != nil {
		return err
	}
	if fi, err := os.Stat(path); err == nil && fi.IsDir() {
		return fmt.Errorf("%s: is a folder, not a file", path)
	}
	dir := filepath.Dir(path)
	for {
		fi, err := os.Stat(dir)
		if err == nil && !fi.IsDir() {
			return fmt.Errorf("%s: cannot create the output's folder: %s is a file", path, dir)
		}
		if err == nil {
			break
		}
		if !errors.Is(err, os.ErrNotExist) && !errors.Is(err, syscall.ENOTDIR) {
			return fmt.Errorf("%s: cannot create the output's folder: %w", path, err)
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			return fmt.Errorf("%s: cannot create the output's folder", path)
		}
		dir = parent
	}
	// The nearest existing folder must take a new entry (a file, or the
	// folders the write will create).
	f, err := os.CreateTemp(dir, ".rcdemand-check-*")
	if err != nil {
		cause := errors.Unwrap(err)
		if cause == nil {
			cause = err
		}
		return fmt.Errorf("%s: cannot write in %s: %w", path, dir, cause)
	}
	f.Close()
	os.Remove(f.Name())
	return nil
}

// WriteAtomic writes a file through write: into a temporary file in the same
// folder (created if needed), synced and then renamed over path. It refuses
// a path that is one of inputs. On any error the temporary file is removed
// and path is untouched.
func WriteAtomic(path string, inputs []string, write func(w io.Writer) error) (err error) {
	if err := refuseInput(path, inputs); err != nil {
		return err
	}
	dir := filepath.Dir(path)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("%s: cannot create the output's folder: %w", path, err)
	}
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("%s: cannot create output: %w", path, err)
	}
	tmp := f.Name()
	tempMu.Lock()
	temps[tmp] = true
	tempMu.Unlock()
	defer func() {
		tempMu.Lock()
		delete(temps, tmp)
		tempMu.Unlock()
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	bw := bufio.NewWriter(f)
	if err = write(bw); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = bw.Flush(); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = f.Sync(); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = os.Chmod(tmp, 0o644); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// WriteJSON writes v as indented JSON, atomically.
func WriteJSON(path string, inputs []string, v any) error {
	return WriteAtomic(path, inputs, func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(v)
	})
}

// Frame is an output table: named columns, each a []string or []float64 of
// one common length. A NaN is a missing value: an empty cell in CSV, a null
// in Parquet.
type Frame struct {
	Names []string
	Cols  []any
}

// Add appends a column.
func (f *Frame) Add(name string, col any) {
	f.Names = append(f.Names, name)
	f.Cols = append(f.Cols, col)
}

func (f *Frame) rows() int {
	if len(f.Cols) == 0 {
		return 0
	}
	switch c := f.Cols[0].(type) {
	case []string:
		return len(c)
	case []float64:
		return len(c)
	}
	return 0
}

// TableFormat returns the format of an output table, "csv" or "parquet",
// from the extension of path, or an error naming the path.
func TableFormat(path string) (string, error) {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".csv":
		return "csv", nil
	case ".parquet", ".pq":
		return "parquet", nil
	}
	return "", fmt.Errorf("%s: unknown table format %q: use .csv or .parquet", path, filepath.Ext(path))
}

// WriteFrame writes f as CSV or Parquet, chosen by the extension of path.
func WriteFrame(path string, inputs []string, f *Frame) error {
	format, err := TableFormat(path)
	if err != nil {
		return err
	}
	if format == "csv" {
		return WriteAtomic(path, inputs, f.writeCSV)
	}
	return WriteAtomic(path, inputs, f.writeParquet)
}

func (f *Frame) writeCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(f.Names); err != nil {
		return err
	}
	rec := make([]string, len(f.Cols))
	for i := 0; i < f.rows(); i++ {
		for c, col := range f.Cols {
			switch v := col.(type) {
			case []string:
				rec[c] = v[i]
			case []float64:
				rec[c] = ""
				if !math.IsNaN(v[i]) {
					rec[c] = strconv.FormatFloat(v[i], 'g', -1, 64)
				}
			}
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
