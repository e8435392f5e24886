// Package data reads, validates and writes the tables rcdemand works on, and
// fingerprints and reads back the files it writes.
//
// A products table has one row n = 1..N per product-market observation; an
// agents table has one row per simulated or sampled consumer of a market.
// Both may be CSV (comma separated, one header line, an optional UTF-8 byte
// order mark) or Parquet, chosen by the file extension.
//
// A Parquet table must be flat: each top-level field one required or
// optional column of integers (INT32 or INT64, any Int logical type, kept
// exact), floating point (FLOAT or DOUBLE; a null reads as NaN) or text
// (BYTE_ARRAY annotated as a String). Any other column (boolean, bytes,
// decimal, date, timestamp, list, struct, repeated) is rejected by name.
// Parquet is read and written with the low-level parquet/file and
// parquet/schema packages of Apache Arrow, one row group and one batch of
// values at a time, rather than through pqarrow and Arrow tables: pqarrow
// links in Arrow's compute kernels, Flight, gRPC and protobuf, which made
// the binary two-thirds larger and more than doubled the page faults of
// starting it, a cost every command paid, Parquet or not. Output tables are
// written with text as required String columns and numbers as optional
// DOUBLE columns whose NaNs are nulls, Snappy-compressed, in row groups of
// at most 65,536 rows; Arrow and other Parquet readers read them as usual.
//
// Every rejection is a single *InputError naming the file, the row and the
// column, so the user can open the file and fix it. Rows are named as data
// rows counted from 1 without the header, and for CSV also by the line on
// which the row starts as an editor or spreadsheet numbers it (header = line
// 1; blank lines and quoted line breaks are counted):
//
//	products.csv: data row 17 (line 18), column "share": 1.02 is not in (0, 1)
//	products.parquet: data row 17, column "share": 1.02 is not in (0, 1)
//
// A Parquet file has no header and no lines, so its rows are data rows only.
// Table.Errorf builds such an error for a row of a table. The checks on a
// products table are:
//
//   - every column the spec names exists, once;
//   - numeric columns hold finite numbers (no empty cells, text, NaN or Inf);
//   - identifiers (market, product, firm) are not empty;
//   - shares lie strictly inside (0, 1);
//   - the inside shares of a market sum to less than 1, so s_0t = 1 − Σ_j s_jt > 0;
//   - no product appears twice in one market;
//   - the table has at least one row.
//
// Identifiers are compared as text. A numeric Parquet identifier is written
// as a CSV file would hold it: integer columns (any width, signed or not) in
// full with every digit; floating-point columns as integers when the value
// is integral and below 2^53 in magnitude (1234567, not 1.234567e+06; −0 as
// 0), otherwise in the shortest form that round-trips. Beyond 2^53 a float64
// cannot hold every integer, so large identifiers must be stored as integers
// or text.
//
// Rows are regrouped so that the rows of a market are contiguous, markets in
// the order of their first appearance and rows within a market in file order
// (a stable grouping). The market index (Market.Start, Market.End) is what
// the parallel code partitions on. Table.Row and Table.Line keep each row's
// place in the file for error messages.
//
// Agent weights of a market must be non-negative and sum to 1 (to 1e-6);
// this is checked rather than silently rescaled, since a mis-sized weight
// column usually means the wrong file or column.
//
// Outputs (JSON, CSV, Parquet) are written atomically: to a temporary file in
// the target folder that is renamed over the target only once complete, so a
// failed or interrupted run never leaves a partial file and an existing output
// is replaced only by a finished one. An output path that names one of the
// run's inputs is refused.
//
// Provenance: Fingerprint records an input file as its role, path, SHA-256
// (lower-case hex, streamed, not read into memory) and size in bytes, the
// "inputs" entries of a results file. A CSV table is hashed as it is read
// (Table.Source), so the fingerprint recorded is that of the bytes parsed,
// even if the file changes later in the run; FingerprintOf does the same for
// content read by other means (the spec). Changed checks recorded fingerprints
// against the files now on disk, relative paths resolved against the results
// file's folder; it compares sizes first and hashes only files of unchanged
// size, and returns one *ChangedError listing every changed or missing file.
//
// ReadJSON reads a JSON file written by rcdemand: it decodes the "schema" key
// first and refuses a file of another schema, naming the file and the
// command that writes the wanted kind, before decoding the body.
package data
