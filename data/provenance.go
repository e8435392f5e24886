package data

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
)

// Input is the fingerprint of one input file.
type Input struct {
	Role   string `json:"role"`   // "spec", "products", "agents", …
	Path   string `json:"path"`   // as recorded (the caller decides relative/absolute)
	SHA256 string `json:"sha256"` // lower-case hex
	Bytes  int64  `json:"bytes"`
}

// Fingerprint reads the file at path and returns its fingerprint with the
// given role; Path is set to path. The file is streamed through SHA-256, not
// read into memory.
func Fingerprint(role, path string) (Input, error) {
	f, err := os.Open(path)
	if err != nil {
		return Input{}, openErr(path, err)
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return Input{}, inputErr(path, 0, "", "cannot read: %v", err)
	}
	return Input{Role: role, Path: path, SHA256: hex.EncodeToString(h.Sum(nil)), Bytes: n}, nil
}

// ChangedInput is one recorded input that no longer matches its file.
type ChangedInput struct {
	Recorded Input  // as recorded at estimation
	Path     string // the file checked: Recorded.Path, resolved against the folder when relative
	Missing  bool   // no file at Path
	Now      Input  // the file's fingerprint now; zero when Missing or Err is set
	Err      error  // the file exists but cannot be read
}

// ChangedError lists the inputs that changed since their fingerprints were
// recorded.
type ChangedError struct{ Inputs []ChangedInput }

// Error is a one-line summary followed by one line per file, e.g.
//
//	2 inputs changed since estimation:
//	  products.csv: changed since estimation (sha256 3f2a9c01d4e5…, now 77b0e1c2a9f3…)
//	  agents.csv: missing
func (e *ChangedError) Error() string {
	var b strings.Builder
	if len(e.Inputs) == 1 {
		b.WriteString("1 input changed since estimation:")
	} else {
		fmt.Fprintf(&b, "%d inputs changed since estimation:", len(e.Inputs))
	}
	for _, c := range e.Inputs {
		b.WriteString("\n  ")
		b.WriteString(c.Path)
		b.WriteString(": ")
		switch {
		case c.Missing:
			b.WriteString("missing")
		case c.Err != nil:
			fmt.Fprintf(&b, "cannot read: %v", unwrapInput(c.Err))
		case c.Now.Bytes != c.Recorded.Bytes:
			fmt.Fprintf(&b, "changed since estimation (%d bytes, now %d)", c.Recorded.Bytes, c.Now.Bytes)
		default:
			fmt.Fprintf(&b, "changed since estimation (sha256 %s, now %s)", shortHash(c.Recorded.SHA256), shortHash(c.Now.SHA256))
		}
	}
	return b.String()
}

// unwrapInput drops the file name that the error would repeat.
func unwrapInput(err error) string {
	var ie *InputError
	if errors.As(err, &ie) {
		return strings.TrimPrefix(ie.Msg, "cannot read: ")
	}
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}

// shortHash abbreviates a hex digest to 12 digits, enough to tell files apart
// when reading a message.
func shortHash(h string) string {
	if len(h) > 12 {
		return h[:12] + "…"
	}
	return h
}

// Changed compares recorded fingerprints with the files now at their paths
// (each recorded Path resolved against dir when relative) and returns one
// *ChangedError listing every input whose size or hash differs or that is
// missing, or nil. A file whose size differs is not hashed.
func Changed(dir string, inputs []Input) error {
	var changed []ChangedInput
	for _, in := range inputs {
		path := in.Path
		if !filepath.IsAbs(path) {
			path = filepath.Join(dir, path)
		}
		c := ChangedInput{Recorded: in, Path: path}
		info, err := os.Stat(path)
		switch {
		case errors.Is(err, os.ErrNotExist):
			c.Missing = true
		case err != nil:
			c.Err = err
		case info.IsDir():
			c.Err = errors.New("is a folder, not a file")
		case info.Size() != in.Bytes:
			c.Now = Input{Role: in.Role, Path: path, Bytes: info.Size()}
		default:
			now, err := Fingerprint(in.Role, path)
			if err != nil {
				c.Err = err
			} else if now.Bytes == in.Bytes && strings.EqualFold(now.SHA256, in.SHA256) {
				continue
			}
			c.Now = now
		}
		changed = append(changed, c)
	}
	if changed == nil {
		return nil
	}
	return &ChangedError{Inputs: changed}
}
