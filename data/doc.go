// Package data reads, validates and writes the tables rcdemand works on.
//
// A products table has one row n = 1..N per product-market observation; an
// agents table has one row per simulated or sampled consumer of a market.
// Both may be CSV (comma separated, one header line, an optional UTF-8 byte
// order mark) or Parquet (read through Apache Arrow's pqarrow), chosen by the
// file extension.
//
// Every rejection is a single *InputError naming the file, the 1-based data
// row (the first line after the header is row 1) and the column, so the user
// can open the file and fix it. The checks on a products table are:
//
//   - every column the spec names exists, once;
//   - numeric columns hold finite numbers (no empty cells, text, NaN or Inf);
//   - identifiers (market, product, firm) are not empty;
//   - shares lie strictly inside (0, 1);
//   - the inside shares of a market sum to less than 1, so s_0t = 1 − Σ_j s_jt > 0;
//   - no product appears twice in one market;
//   - the table has at least one row.
//
// Rows are regrouped so that the rows of a market are contiguous, markets in
// the order of their first appearance and rows within a market in file order
// (a stable grouping). The market index (Market.Start, Market.End) is what
// the parallel code partitions on. Row keeps each row's original data row
// number for error messages.
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
package data
