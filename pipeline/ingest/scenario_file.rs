//! The scenario file (`data.scenarios`): joint scenarios from outside the price history — an economic
//! scenario generator's or a Monte Carlo engine's — read into one row-major return matrix.
//!
//! Columns: `scenario` (a label, unique), optionally `probability`, then one column per asset with its
//! simple return over the horizon as a fraction (−0.05 for a 5% loss). Column order is free; the matrix is
//! laid out in the universe's asset order while it is read, so no later stage copies or reorders it. A
//! column named by the policy as a non-investable benchmark series or by `liabilities.proxy` goes into a
//! second matrix (the reference set), rows as in the first. Every asset of the universe needs a column; a
//! column that is neither an asset of the asset file nor such a series is an error, as in the price file.
//!
//! A CSV is streamed: lines are read in batches and each batch is parsed in parallel straight into its
//! rows of the matrix (a 2,000 × 100,000 file is about 2 GB of text, never held whole). A Parquet file is
//! read by polars after `parquet_guard`; its return and probability columns must be floating point.
//! This module reads only the file it is given; later stages see the [`ScenarioTable`].

use super::truncate;
use crate::error::{Error, Result};
use rayon::prelude::*;
use std::io::{BufRead, BufReader, Read};
use std::path::Path;

/// Probabilities must sum to 1 within this; they are then divided by their sum, so the models see a
/// distribution that sums to 1 to round-off (files written with six decimals sum to 1 ± a few 1e-7).
pub const PROBABILITY_TOLERANCE: f64 = 1e-6;

/// Largest return magnitude accepted, as for scenarios cut from prices (`scenarios::MAX_ABS_RETURN`).
const MAX_ABS_RETURN: f64 = 1e6;

/// Lines parsed per parallel batch of a CSV.
const BATCH_LINES: usize = 4096;

/// What the file holds, laid out for the run.
#[derive(Debug, Clone, Default)]
pub struct ScenarioTable {
    /// The `scenario` label of every row, in file order.
    pub labels: Vec<String>,
    /// The `probability` column normalised to sum to 1, or `None` without the column (equal).
    pub probabilities: Option<Vec<f64>>,
    /// Row-major returns, one row of `assets.len()` per scenario, in the order of the `assets` asked for.
    pub returns: Vec<f64>,
    /// Row-major returns of the non-investable `reference` series asked for, rows as `returns`.
    pub reference: Vec<f64>,
    /// File line of data row 0 for a CSV (messages name lines), `None` for Parquet.
    pub first_line: Option<usize>,
}

/// The columns to look for: the universe's assets, the non-investable series, and the asset file's
/// other assets (dropped from the universe by the price fill policy: their columns are passed over).
pub struct Wanted<'a> {
    pub assets: &'a [String],
    pub reference: &'a [String],
    pub other_assets: &'a [String],
    /// The asset metadata file, for messages.
    pub asset_file: &'a Path,
    /// Fewest scenarios the run accepts, and why.
    pub min_scenarios: (usize, String),
}

/// Where one column of the file goes.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Slot {
    Label,
    Probability,
    Asset(usize),
    Reference(usize),
    Skip,
}

/// Reads the scenario file at `path` (CSV or Parquet by extension, as every data file).
pub fn read(path: &Path, wanted: &Wanted) -> Result<ScenarioTable> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    let mut table = if ext == "parquet" || ext == "pq" {
        read_parquet(path, wanted)?
    } else {
        read_csv(path, wanted)?
    };
    let first = table.first_line;
    let at = |r: usize| place(r, first.map(|f| f + r));
    check_labels(path, &table.labels, &at)?;
    let s = table.labels.len();
    if s == 0 {
        let header = first.map_or("the column list".to_string(), |f| {
            format!("line {} (header)", f - 1)
        });
        return Err(Error::data(
            path,
            format!(
                "{header}: no scenario rows follow the header; the file needs one row per scenario"
            ),
        ));
    }
    let (needed, why) = &wanted.min_scenarios;
    if s < *needed {
        return Err(Error::data(
            path,
            format!(
                "{}: the file ends after {s} scenarios; at least {needed} are needed ({why}): give more scenarios or lower the levels",
                at(s - 1)
            ),
        ));
    }
    if let Some(p) = table.probabilities.as_mut() {
        normalise(path, p)?;
    }
    Ok(table)
}

/// "row 3 (line 5)" with line numbers, "row 3" without (Parquet).
fn place(row: usize, line: Option<usize>) -> String {
    match line {
        Some(l) => format!("row {} (line {l})", row + 1),
        None => format!("row {}", row + 1),
    }
}

/// The place of every header name: label, probability, an asset or series, or passed over.
fn slots(path: &Path, names: &[String], wanted: &Wanted, header: &str) -> Result<Vec<Slot>> {
    let find = |list: &[String], n: &str| list.iter().position(|a| a == n);
    let mut out = Vec::with_capacity(names.len());
    for (c, name) in names.iter().enumerate() {
        let slot = if name.eq_ignore_ascii_case("scenario") {
            Slot::Label
        } else if name.eq_ignore_ascii_case("probability") {
            Slot::Probability
        } else if let Some(i) = find(wanted.assets, name) {
            Slot::Asset(i)
        } else if let Some(j) = find(wanted.reference, name) {
            Slot::Reference(j)
        } else if find(wanted.other_assets, name).is_some() {
            Slot::Skip
        } else {
            return Err(Error::data(
                path,
                format!(
                    "{header}, column {} `{}`: is not an asset of the asset metadata file {} (nor a series the policy or liabilities.proxy names); every column after `scenario` and `probability` is an asset's return: add the asset's row or remove the column",
                    c + 1,
                    truncate(name, 40),
                    wanted.asset_file.display()
                ),
            ));
        };
        if slot != Slot::Skip && out.contains(&slot) {
            return Err(Error::data(
                path,
                format!(
                    "{header}, column {} `{}`: appears twice in the header",
                    c + 1,
                    truncate(name, 40)
                ),
            ));
        }
        out.push(slot);
    }
    check_columns(path, &out, wanted, header)?;
    Ok(out)
}

/// The label column is there, and every asset and series has a column.
fn check_columns(path: &Path, slots: &[Slot], wanted: &Wanted, header: &str) -> Result<()> {
    if !slots.contains(&Slot::Label) {
        return Err(Error::data(
            path,
            format!(
                "{header}: has no `scenario` column; the header is `scenario,[probability,]<asset>…` with one label per row"
            ),
        ));
    }
    let missing = |list: &[String], f: fn(usize) -> Slot| {
        list.iter()
            .enumerate()
            .find(|(i, _)| !slots.contains(&f(*i)))
            .map(|(_, a)| a.clone())
    };
    if let Some(a) = missing(wanted.assets, Slot::Asset) {
        return Err(Error::data(
            path,
            format!(
                "{header}: has no column for asset `{}`, which the asset metadata file {} lists; every asset needs its return in every scenario: add the column or remove the asset's row",
                truncate(&a, 40),
                wanted.asset_file.display()
            ),
        ));
    }
    if let Some(s) = missing(wanted.reference, Slot::Reference) {
        return Err(Error::data(
            path,
            format!(
                "{header}: has no column for series `{}`, which the config names (policy benchmark or liabilities.proxy); with a scenario file its returns come from the file: add the column",
                truncate(&s, 40)
            ),
        ));
    }
    Ok(())
}

/// The matrices' widths.
fn widths(wanted: &Wanted) -> (usize, usize) {
    (wanted.assets.len(), wanted.reference.len())
}

/// One cell read as a return: a finite number above −1 and within ±[`MAX_ABS_RETURN`].
fn return_value(text: &str) -> std::result::Result<f64, String> {
    let t = text.trim();
    if t.is_empty() {
        return Err("is empty; every asset needs a return in every scenario".to_string());
    }
    let v: f64 = t
        .parse()
        .map_err(|_| format!("`{}` is not a number", truncate(t, 24)))?;
    usable_return(v)
}

fn usable_return(v: f64) -> std::result::Result<f64, String> {
    if !v.is_finite() {
        return Err(format!(
            "{v} is not a finite number; a return is a fraction over the horizon"
        ));
    }
    if v <= -1.0 {
        return Err(format!(
            "the return {v} is a loss of 100% or more; returns are fractions over the horizon (−0.05 for a 5% loss) and a long holding cannot lose more than its value"
        ));
    }
    if v.abs() > MAX_ABS_RETURN {
        return Err(format!(
            "the return {v:e} is beyond ±{MAX_ABS_RETURN:e}; returns are fractions over the horizon (0.05 for 5%)"
        ));
    }
    Ok(v)
}

/// One probability cell: a finite number ≥ 0.
fn probability_value(text: &str) -> std::result::Result<f64, String> {
    let t = text.trim();
    let v: f64 = t
        .parse()
        .map_err(|_| format!("`{}` is not a number", truncate(t, 24)))?;
    if !v.is_finite() || v < 0.0 {
        return Err(format!("the probability {v} is not a finite number ≥ 0"));
    }
    Ok(v)
}

/// Labels are non-empty and unique; a repeated label names both rows.
fn check_labels(path: &Path, labels: &[String], at: &dyn Fn(usize) -> String) -> Result<()> {
    let mut seen: std::collections::HashMap<&str, usize> =
        std::collections::HashMap::with_capacity(labels.len());
    for (r, l) in labels.iter().enumerate() {
        if let Some(first) = seen.insert(l.as_str(), r) {
            return Err(Error::data(
                path,
                format!(
                    "{}, column `scenario`: the label `{}` is also the label of {}; every scenario needs a label of its own",
                    at(r),
                    truncate(l, 40),
                    at(first)
                ),
            ));
        }
    }
    Ok(())
}

/// Probabilities must sum to 1 within [`PROBABILITY_TOLERANCE`]; they are then divided by their sum.
fn normalise(path: &Path, p: &mut [f64]) -> Result<()> {
    let total: f64 = p.iter().sum();
    if (total - 1.0).abs() > PROBABILITY_TOLERANCE {
        return Err(Error::data(
            path,
            format!(
                "column `probability`: the probabilities of the {} scenarios sum to {total:.9}, not 1 (tolerance {PROBABILITY_TOLERANCE:e}); give every scenario's probability so that they sum to 1, or leave the column out for equal probabilities",
                p.len()
            ),
        ));
    }
    if total != 1.0 {
        p.iter_mut().for_each(|x| *x /= total);
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------------------
// CSV, streamed.

/// A CSV line split at commas; a field in double quotes loses them (labels and names need no commas).
fn fields(line: &str) -> impl Iterator<Item = &str> {
    line.split(',').map(|f| {
        let f = f.trim();
        f.strip_prefix('"')
            .and_then(|x| x.strip_suffix('"'))
            .unwrap_or(f)
    })
}

/// Reads the next line into `buf` without its line end; `false` at the end of the file. A line that is not
/// UTF-8 is an error naming it.
fn next_line(path: &Path, r: &mut impl BufRead, buf: &mut String, line: usize) -> Result<bool> {
    buf.clear();
    let mut bytes = Vec::new();
    let n = r
        .read_until(b'\n', &mut bytes)
        .map_err(|e| Error::data(path, format!("line {line}: cannot be read: {e}")))?;
    if n == 0 {
        return Ok(false);
    }
    while matches!(bytes.last(), Some(b'\n' | b'\r')) {
        bytes.pop();
    }
    *buf = String::from_utf8(bytes).map_err(|_| {
        Error::data(
            path,
            format!("line {line}: is not UTF-8 text; save the file as UTF-8"),
        )
    })?;
    Ok(true)
}

fn read_csv(path: &Path, wanted: &Wanted) -> Result<ScenarioTable> {
    let rows_hint = count_lines(path)?;
    let mut r = BufReader::with_capacity(1 << 20, crate::error::fs::open(path)?);
    let mut buf = String::new();
    let mut line = 0;
    let header = loop {
        line += 1;
        if !next_line(path, &mut r, &mut buf, line)? {
            return Err(Error::data(
                path,
                "line 1: the file is empty; expected a header line such as `scenario,AS01,AS02` or `scenario,probability,AS01,AS02` and one row per scenario",
            ));
        }
        let t = buf.trim_start_matches('\u{feff}');
        if !t.trim_start().starts_with('#') {
            break t.to_string();
        }
    };
    let names: Vec<String> = fields(&header).map(str::to_string).collect();
    let slots = slots(path, &names, wanted, &format!("line {line} (header)"))?;
    let mut out = Table::new(wanted, slots.contains(&Slot::Probability), rows_hint);
    let first_line = line + 1;
    let mut batch: Vec<String> = Vec::with_capacity(BATCH_LINES);
    loop {
        let more = next_line(path, &mut r, &mut buf, line + 1)?;
        if more {
            line += 1;
            batch.push(std::mem::take(&mut buf));
        }
        if batch.len() == BATCH_LINES || (!more && !batch.is_empty()) {
            let start = line + 1 - batch.len();
            parse_batch(path, &batch, &slots, &names, &mut out, (start, first_line))?;
            batch.clear();
        }
        if !more {
            break;
        }
    }
    out.trim_blank_tail();
    let mut table = out.finish();
    table.first_line = Some(first_line);
    Ok(table)
}

/// Newlines in the file: the row count's upper bound, so the matrix is allocated once.
fn count_lines(path: &Path) -> Result<usize> {
    let mut f = crate::error::fs::open(path)?;
    let mut chunk = vec![0u8; 1 << 20];
    let mut n = 0;
    loop {
        let got = f
            .read(&mut chunk)
            .map_err(|e| Error::data(path, format!("cannot be read: {e}")))?;
        if got == 0 {
            return Ok(n + 1);
        }
        n += chunk[..got].iter().filter(|b| **b == b'\n').count();
    }
}

/// The matrices being filled.
struct Table {
    labels: Vec<String>,
    probabilities: Option<Vec<f64>>,
    returns: Vec<f64>,
    reference: Vec<f64>,
    n: usize,
    m: usize,
    /// Rows at the end that were blank lines (allowed only at the end of the file).
    blank_tail: usize,
}

impl Table {
    fn new(wanted: &Wanted, probability: bool, rows_hint: usize) -> Table {
        let (n, m) = widths(wanted);
        Table {
            labels: Vec::with_capacity(rows_hint),
            probabilities: probability.then(|| Vec::with_capacity(rows_hint)),
            returns: Vec::with_capacity(rows_hint * n),
            reference: Vec::with_capacity(rows_hint * m),
            n,
            m,
            blank_tail: 0,
        }
    }

    fn trim_blank_tail(&mut self) {
        let keep = self.labels.len() - self.blank_tail;
        self.labels.truncate(keep);
        if let Some(p) = self.probabilities.as_mut() {
            p.truncate(keep);
        }
        self.returns.truncate(keep * self.n);
        self.reference.truncate(keep * self.m);
    }

    fn finish(self) -> ScenarioTable {
        ScenarioTable {
            labels: self.labels,
            probabilities: self.probabilities,
            returns: self.returns,
            reference: self.reference,
            first_line: None,
        }
    }
}

/// One parsed line: its label, probability, or the first bad cell (column index, why).
struct Parsed {
    label: String,
    probability: f64,
    blank: bool,
}

/// Parses a batch of lines in parallel, each straight into its row of the matrices; the first bad line
/// in file order is the error. `start` is the file line of `lines[0]`, `first` that of data row 0.
fn parse_batch(
    path: &Path,
    lines: &[String],
    slots: &[Slot],
    names: &[String],
    t: &mut Table,
    (start, first): (usize, usize),
) -> Result<()> {
    let (n, m) = (t.n, t.m);
    let rows = t.labels.len();
    t.returns.resize((rows + lines.len()) * n, 0.0);
    t.reference.resize((rows + lines.len()) * m, 0.0);
    // Without reference series each line still gets a (scratch) reference row, so the zip stays aligned.
    let mut scratch = if m == 0 {
        vec![0.0; lines.len()]
    } else {
        vec![]
    };
    let refs: &mut [f64] = if m == 0 {
        &mut scratch
    } else {
        &mut t.reference[rows * m..]
    };
    let mut parsed: Vec<std::result::Result<Parsed, String>> = Vec::with_capacity(lines.len());
    lines
        .par_iter()
        .zip(t.returns[rows * n..].par_chunks_mut(n.max(1)))
        .zip(refs.par_chunks_mut(m.max(1)))
        .map(|((l, row), refs)| parse_line(l, slots, names, row, refs))
        .collect_into_vec(&mut parsed);
    for (i, p) in parsed.into_iter().enumerate() {
        let row = rows + i;
        let p = p.map_err(|why| {
            let sep = if why.starts_with("column ") {
                ", "
            } else {
                ": "
            };
            Error::data(path, format!("{}{sep}{why}", place(row, Some(start + i))))
        })?;
        if p.blank {
            t.blank_tail += 1;
        } else if t.blank_tail > 0 {
            let at = row - t.blank_tail;
            return Err(Error::data(
                path,
                format!(
                    "{}: is blank; blank lines are allowed only at the end of the file",
                    place(at, Some(first + at))
                ),
            ));
        }
        t.labels.push(p.label);
        if let Some(ps) = t.probabilities.as_mut() {
            ps.push(p.probability);
        }
    }
    Ok(())
}

/// Parses one data line into `row` and `refs`; a blank line is marked so (allowed only at the end).
fn parse_line(
    line: &str,
    slots: &[Slot],
    names: &[String],
    row: &mut [f64],
    refs: &mut [f64],
) -> std::result::Result<Parsed, String> {
    if line.trim().is_empty() {
        return Ok(Parsed {
            label: String::new(),
            probability: 0.0,
            blank: true,
        });
    }
    let mut out = Parsed {
        label: String::new(),
        probability: 0.0,
        blank: false,
    };
    let mut count = 0;
    for (c, f) in fields(line).enumerate() {
        count += 1;
        let Some(slot) = slots.get(c) else { continue };
        let cell = |why: String| format!("column {} `{}`: {why}", c + 1, truncate(&names[c], 40));
        match *slot {
            Slot::Label if f.is_empty() => {
                return Err(cell("is empty; every scenario needs a label".to_string()));
            }
            Slot::Label => out.label = f.to_string(),
            Slot::Probability => out.probability = probability_value(f).map_err(cell)?,
            Slot::Asset(i) => row[i] = return_value(f).map_err(cell)?,
            Slot::Reference(j) => refs[j] = return_value(f).map_err(cell)?,
            Slot::Skip => {}
        }
    }
    if count != slots.len() {
        return Err(format!(
            "has {count} fields where the header has {}; every row needs one value per column (a comma inside a value is not allowed)",
            slots.len()
        ));
    }
    Ok(out)
}

// ---------------------------------------------------------------------------------------------------------
// Parquet.

fn read_parquet(path: &Path, wanted: &Wanted) -> Result<ScenarioTable> {
    let bytes = crate::error::fs::read(path)?;
    let mut df = super::table::parquet_frame(path, &bytes)?;
    drop(bytes);
    let names: Vec<String> = df
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect();
    let slots = slots(path, &names, wanted, "the column list")?;
    let rows = df.height();
    let (n, m) = widths(wanted);
    let mut t = Table::new(wanted, slots.contains(&Slot::Probability), rows);
    t.returns.resize(rows * n, 0.0);
    t.reference.resize(rows * m, 0.0);
    for (c, (name, slot)) in names.iter().zip(&slots).enumerate() {
        let col = df
            .drop_in_place(name)
            .map_err(|e| Error::data(path, format!("column `{name}`: {e}")))?;
        let s = col.as_materialized_series();
        let wrong = |what: &str| {
            Error::data(
                path,
                format!(
                    "column {} `{}`: has type {}, not {what}; write the file with that column as {what}",
                    c + 1,
                    truncate(name, 40),
                    s.dtype()
                ),
            )
        };
        match *slot {
            Slot::Label => t.labels = labels_of(path, s, name)?,
            Slot::Probability => {
                let v = floats(s).ok_or_else(|| wrong("floating point (double)"))?;
                t.probabilities = Some(probabilities_of(path, name, c, &v)?);
            }
            Slot::Asset(i) => {
                let v = floats(s).ok_or_else(|| wrong("floating point (double)"))?;
                put_column(path, (name, c), &v, &mut t.returns, (i, n))?;
            }
            Slot::Reference(j) => {
                let v = floats(s).ok_or_else(|| wrong("floating point (double)"))?;
                put_column(path, (name, c), &v, &mut t.reference, (j, m))?;
            }
            Slot::Skip => {}
        }
    }
    Ok(t.finish())
}

/// A float column's values (Float64 or Float32), a null as NaN; `None` for any other type.
fn floats(s: &polars::prelude::Series) -> Option<Vec<Option<f64>>> {
    use polars::prelude::DataType;
    match s.dtype() {
        DataType::Float64 => Some(s.f64().ok()?.iter().collect()),
        DataType::Float32 => Some(s.f32().ok()?.iter().map(|v| v.map(f64::from)).collect()),
        _ => None,
    }
}

/// The `scenario` column as text: strings or integers.
fn labels_of(path: &Path, s: &polars::prelude::Series, name: &str) -> Result<Vec<String>> {
    use polars::prelude::DataType;
    let ok = matches!(s.dtype(), DataType::String) || s.dtype().is_integer();
    if !ok {
        return Err(Error::data(
            path,
            format!(
                "column `{name}`: has type {}, not text or integer; scenario labels are text (or whole numbers)",
                s.dtype()
            ),
        ));
    }
    let text = s
        .cast(&DataType::String)
        .map_err(|e| Error::data(path, format!("column `{name}`: {e}")))?;
    let ca = text.str().expect("cast to string");
    ca.iter()
        .enumerate()
        .map(|(r, v)| match v {
            Some(v) if !v.trim().is_empty() => Ok(v.trim().to_string()),
            _ => Err(Error::data(
                path,
                format!(
                    "{}, column `{name}`: is empty; every scenario needs a label",
                    place(r, None)
                ),
            )),
        })
        .collect()
}

fn probabilities_of(path: &Path, name: &str, c: usize, v: &[Option<f64>]) -> Result<Vec<f64>> {
    v.iter()
        .enumerate()
        .map(|(r, x)| {
            let x = x.ok_or_else(|| "is empty".to_string()).and_then(|x| {
                if x.is_finite() && x >= 0.0 {
                    Ok(x)
                } else {
                    Err(format!("the probability {x} is not a finite number ≥ 0"))
                }
            });
            x.map_err(|why| {
                Error::data(
                    path,
                    format!("{}, column {} `{name}`: {why}", place(r, None), c + 1),
                )
            })
        })
        .collect()
}

/// Writes one column into its place `at` of rows `width` wide, each value checked.
fn put_column(
    path: &Path,
    (name, c): (&str, usize),
    v: &[Option<f64>],
    out: &mut [f64],
    (at, width): (usize, usize),
) -> Result<()> {
    for (r, x) in v.iter().enumerate() {
        let checked = x
            .ok_or_else(|| "is empty; every asset needs a return in every scenario".to_string())
            .and_then(usable_return);
        out[r * width + at] = checked.map_err(|why| {
            Error::data(
                path,
                format!(
                    "{}, column {} `{}`: {why}",
                    place(r, None),
                    c + 1,
                    truncate(name, 40)
                ),
            )
        })?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_outside_the_rules_are_refused() {
        assert!(return_value("-1").is_err());
        assert!(return_value("-0.999").is_ok());
        assert!(return_value("NaN").is_err());
        assert!(return_value("inf").is_err());
        assert!(return_value("abc").is_err());
        assert!(return_value("").is_err());
        assert!(probability_value("-0.1").is_err());
        assert_eq!(probability_value(" 0.25 "), Ok(0.25));
    }
}
