package demand

import (
	"errors"
	"fmt"
	"path/filepath"
	"strings"

	"rcdemand/data"
)

// inputRoles names the files of Model.Inputs, in order.
var inputRoles = []string{"spec", "products", "agents"}

// RecordInputs sets r.Inputs to the fingerprints (SHA-256 and size) of the
// model's input files — spec, products and agents — with paths relative
// to the folder of the results file at outPath, like SpecFile, so that a
// folder of spec, data and results can be moved as a whole. A file read
// whole when the model was loaded is fingerprinted from the bytes read
// then, the data the estimates come from; any other is read again now.
func (r *Results) RecordInputs(m *Model, outPath string) error {
	read := []*data.Input{m.Spec.source, tableSource(m.Products.Table), nil}
	if m.Agents != nil {
		read[2] = tableSource(m.Agents.Table)
	}
	var files []data.Recorded
	for i, path := range m.Inputs() {
		files = append(files, data.Recorded{Role: inputRoles[min(i, len(inputRoles)-1)], Path: path, Read: read[i]})
	}
	ins, err := data.FingerprintsOf(outPath, files...)
	r.Inputs = ins
	return err
}

// tableSource returns the fingerprint of the bytes t was read from, or nil.
func tableSource(t *data.Table) *data.Input {
	if in, ok := t.Source(); ok {
		return &in
	}
	return nil
}

// LoadOption changes how LoadFitted treats the inputs recorded in a results
// file.
type LoadOption func(*loadOptions)

type loadOptions struct {
	allowChanged bool
	warn, note   func(string)
}

// AllowChangedData makes LoadFitted proceed, with a warning, when an input
// changed since estimation (instead of refusing with a *ChangedDataError).
func AllowChangedData(allow bool) LoadOption {
	return func(o *loadOptions) { o.allowChanged = allow }
}

// Messages sets where LoadFitted reports a warning (inputs changed, allowed)
// and a note (results written before inputs were recorded).
func Messages(warn, note func(string)) LoadOption {
	return func(o *loadOptions) { o.warn, o.note = warn, note }
}

// ChangedDataError is LoadFitted's refusal to use a results file whose
// inputs (spec, products or agents) changed since estimation.
type ChangedDataError struct {
	Results string
	Changed *data.ChangedError
}

// Error names the results file and every changed input on one line.
func (e *ChangedDataError) Error() string {
	return fmt.Sprintf("%s: %s; the estimates are not those of the data now on disk: estimate again", e.Results, e.Changed.Line("estimation"))
}

func (e *ChangedDataError) Unwrap() error { return e.Changed }

// checkInputs compares the inputs recorded in r with the files now on disk.
func (r *Results) checkInputs(resultsPath string, o loadOptions) error {
	if len(r.Inputs) == 0 {
		if o.note != nil {
			o.note(fmt.Sprintf("%s records no fingerprints of its inputs (written by an older rcdemand), so changes to the data since estimation cannot be detected", resultsPath))
		}
		return nil
	}
	err := data.Changed(filepath.Dir(resultsPath), r.Inputs)
	var ch *data.ChangedError
	if !errors.As(err, &ch) {
		return err
	}
	cerr := &ChangedDataError{Results: resultsPath, Changed: ch}
	if !o.allowChanged {
		return cerr
	}
	if o.warn != nil {
		msg := cerr.Error()
		msg = strings.TrimSuffix(msg, "; the estimates are not those of the data now on disk: estimate again")
		o.warn(msg + "; proceeding as asked: the estimates were made from other data than those now used")
	}
	return nil
}
