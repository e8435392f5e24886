package data

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
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
	in := sum(h, n)
	in.Role, in.Path = role, path
	return in, nil
}

// sum returns the fingerprint of the bytes h has hashed, n of them.
func sum(h hash.Hash, n int64) Input {
	return Input{SHA256: hex.EncodeToString(h.Sum(nil)), Bytes: n}
}

// FingerprintOf returns the fingerprint of content read from the file at
// path, as Fingerprint would find it there.
func FingerprintOf(role, path string, content []byte) Input {
	h := sha256.New()
	h.Write(content)
	in := sum(h, int64(len(content)))
	in.Role, in.Path = role, path
	return in
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
		b.WriteString(c.Describe("estimation"))
	}
	return b.String()
}

// Line lists the changed inputs on one line, each described as by
// Describe with since ("estimation", "the merger was simulated").
func (e *ChangedError) Line(since string) string {
	parts := make([]string, len(e.Inputs))
	for k, c := range e.Inputs {
		parts[k] = c.Describe(since)
	}
	return strings.Join(parts, "; ")
}

// Describe says how the input differs from its record, e.g.
// "products.csv: changed since estimation (412 bytes, now 398)" for since
// "estimation".
func (c ChangedInput) Describe(since string) string {
	switch {
	case c.Missing:
		return c.Path + ": missing"
	case c.Err != nil:
		return fmt.Sprintf("%s: cannot read: %v", c.Path, unwrapInput(c.Err))
	case c.Now.Bytes != c.Recorded.Bytes:
		return fmt.Sprintf("%s: changed since %s (%d bytes, now %d)", c.Path, since, c.Recorded.Bytes, c.Now.Bytes)
	}
	return fmt.Sprintf("%s: changed since %s (sha256 %s, now %s)", c.Path, since, shortHash(c.Recorded.SHA256), shortHash(c.Now.SHA256))
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

// RelativeTo returns target relative to the folder of the file at from,
// with forward slashes (how one output file refers to another, or to an
// input, so that a folder of files can be moved as a whole), or target
// itself when there is no such path.
func RelativeTo(target, from string) string {
	a, err1 := filepath.Abs(target)
	b, err2 := filepath.Abs(filepath.Dir(from))
	if err1 == nil && err2 == nil {
		if rel, err := filepath.Rel(b, a); err == nil {
			return filepath.ToSlash(rel)
		}
	}
	return target
}

// Resolve returns path as written in the file at from: an absolute path as
// it is, a relative one against from's folder. An empty path stays empty.
func Resolve(from, path string) string {
	if path == "" || filepath.IsAbs(path) {
		return path
	}
	return filepath.Join(filepath.Dir(from), path)
}

// Fingerprints returns the fingerprints of the files given as role, path
// pairs (a pair with an empty path is skipped), with paths relative to the
// folder of out, the file that records them.
func Fingerprints(out string, rolePaths ...string) ([]Input, error) {
	var files []Recorded
	for i := 0; i+1 < len(rolePaths); i += 2 {
		files = append(files, Recorded{Role: rolePaths[i], Path: rolePaths[i+1]})
	}
	return FingerprintsOf(out, files...)
}

// Recorded is an input file to record: its role, its path, and the
// fingerprint of the bytes already read from it (Table.Source), or nil.
type Recorded struct {
	Role, Path string
	Read       *Input
}

// FingerprintsOf is Fingerprints for files that may have been read already:
// those are recorded from the bytes read, the others are read now.
func FingerprintsOf(out string, files ...Recorded) ([]Input, error) {
	var ins []Input
	for _, f := range files {
		if f.Path == "" {
			continue
		}
		var in Input
		if f.Read != nil {
			in = *f.Read
		} else {
			var err error
			if in, err = Fingerprint(f.Role, f.Path); err != nil {
				return nil, err
			}
		}
		in.Role, in.Path = f.Role, RelativeTo(f.Path, out)
		ins = append(ins, in)
	}
	return ins, nil
}
