//! CSV tables written from one list of columns: each column carries its name and how it
//! prints a row's value, so a header and its rows cannot drift apart when a column is added.
//! Numbers go through [`push_fixed`] (fixed decimals, the standard formatter's
//! digits without its slow path), so outputs are byte-identical between runs.

use std::fmt::Display;
use std::io::{self, Write};

/// Prints one cell of a row into a line.
type Printer<R> = Box<dyn Fn(&R, &mut String) + Send + Sync>;

/// One column of a CSV table of rows `R`.
pub struct Column<R> {
    /// The header name.
    pub name: String,
    print: Printer<R>,
}

impl<R> Column<R> {
    /// A number with `decimals` fixed decimals; empty where `value` gives `None`.
    pub fn fixed(
        name: impl Into<String>,
        decimals: usize,
        value: impl Fn(&R) -> Option<f64> + Send + Sync + 'static,
    ) -> Self {
        Column {
            name: name.into(),
            print: Box::new(move |row, out| {
                if let Some(v) = value(row) {
                    push_fixed(out, v, decimals);
                }
            }),
        }
    }

    /// A value as it displays (ids, counts, flags); empty where `value` gives `None`.
    pub fn shown<T: Display>(name: impl Into<String>, value: impl Fn(&R) -> Option<T> + Send + Sync + 'static) -> Self {
        Column {
            name: name.into(),
            print: Box::new(move |row, out| {
                if let Some(v) = value(row) {
                    use std::fmt::Write;
                    write!(out, "{v}").expect("writing to a String");
                }
            }),
        }
    }

    /// The same column over rows of another type that hold an `R`.
    pub fn within<S>(self, inner: impl Fn(&S) -> &R + Send + Sync + 'static) -> Column<S>
    where
        R: 'static,
    {
        let print = self.print;
        Column {
            name: self.name,
            print: Box::new(move |row, out| print(inner(row), out)),
        }
    }
}

/// The header line of `columns`.
pub fn write_header<R>(out: &mut impl Write, columns: &[Column<R>]) -> io::Result<()> {
    let names: Vec<&str> = columns.iter().map(|c| c.name.as_str()).collect();
    writeln!(out, "{}", names.join(","))
}

/// One line per row of `rows`, a cell per column.
pub fn write_rows<'r, R: 'r>(
    out: &mut impl Write,
    columns: &[Column<R>],
    rows: impl IntoIterator<Item = &'r R>,
) -> io::Result<()> {
    let mut line = String::with_capacity(256);
    for row in rows {
        line.clear();
        push_row(&mut line, columns, row);
        out.write_all(line.as_bytes())?;
    }
    Ok(())
}

/// Appends `row`'s line (its cells and the line end) to `line`.
fn push_row<R>(line: &mut String, columns: &[Column<R>], row: &R) {
    for (k, c) in columns.iter().enumerate() {
        if k > 0 {
            line.push(',');
        }
        (c.print)(row, line);
    }
    line.push('\n');
}

/// Rows per parallel task of [`write_table_in_parallel`], and tasks formatted before their
/// text is written (so a long table is never held as text all at once).
const ROWS_PER_TASK: usize = 2048;
const TASKS_AT_ONCE: usize = 16;

/// [`write_table`] of a slice, its lines formatted on every core, blocks of rows at a time,
/// and written in order: the same bytes (each line depends on its row alone). For the long
/// tables written while nothing else runs (`tracks.csv`: ~30 ms on one core for 100 frames
/// of 300 nuclei).
pub fn write_table_in_parallel<R: Sync>(out: &mut impl Write, columns: &[Column<R>], rows: &[R]) -> io::Result<()> {
    use rayon::prelude::*;
    write_header(out, columns)?;
    for group in rows.chunks(ROWS_PER_TASK * TASKS_AT_ONCE) {
        let texts: Vec<String> = group
            .par_chunks(ROWS_PER_TASK)
            .map(|chunk| {
                let mut text = String::with_capacity(chunk.len() * 64);
                chunk.iter().for_each(|row| push_row(&mut text, columns, row));
                text
            })
            .collect();
        for text in texts {
            out.write_all(text.as_bytes())?;
        }
    }
    Ok(())
}

/// The header, then one line per row.
pub fn write_table<'r, R: 'r>(
    out: &mut impl Write,
    columns: &[Column<R>],
    rows: impl IntoIterator<Item = &'r R>,
) -> io::Result<()> {
    write_header(out, columns)?;
    write_rows(out, columns, rows)
}

/// Appends `v` with `decimals` digits after the point, exactly as `format!("{v:.decimals$}")`
/// would (the nearest decimal to the exact binary value), without the formatter's slow exact
/// path in the common case: the value is scaled and rounded in integers when it is small
/// enough that the scaling error (half a unit in the last place, at most 2⁻¹³ below 2⁴⁰)
/// cannot move it across a rounding boundary, i.e. when it is not within 10⁻³ of a tie.
/// Ties, large values and non-finite values go through the formatter.
pub fn push_fixed(out: &mut String, v: f64, decimals: usize) {
    const POWERS: [f64; 7] = [1.0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6];
    const LIMIT: f64 = (1u64 << 40) as f64;
    let scaled = v.abs() * POWERS.get(decimals).copied().unwrap_or(f64::NAN);
    let fraction = scaled - scaled.floor();
    let small = scaled < LIMIT; // false for NaN and infinity too
    if !small || (fraction - 0.5).abs() < 1e-3 {
        use std::fmt::Write;
        write!(out, "{v:.decimals$}").expect("writing to a String");
        return;
    }
    let mut buffer = [0u8; 20];
    let digits = decimal_digits(scaled.round() as u64, &mut buffer);
    if v.is_sign_negative() {
        out.push('-');
    }
    if digits.len() <= decimals {
        out.push('0');
        if decimals > 0 {
            out.push('.');
            (digits.len()..decimals).for_each(|_| out.push('0'));
            out.push_str(digits);
        }
    } else {
        let (whole, part) = digits.split_at(digits.len() - decimals);
        out.push_str(whole);
        if decimals > 0 {
            out.push('.');
            out.push_str(part);
        }
    }
}

/// The decimal digits of `n` (no sign, no leading zeros; "0" for 0), written into `buffer`
/// rather than a new string: a table cell costs no allocation.
fn decimal_digits(mut n: u64, buffer: &mut [u8; 20]) -> &str {
    let mut start = buffer.len();
    loop {
        start -= 1;
        buffer[start] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 {
            break;
        }
    }
    std::str::from_utf8(&buffer[start..]).expect("ASCII digits")
}

/// One row of a CSV file read by column names ([`read_named_columns`]): cells by the index of
/// their name in the list asked for, parsed with errors that name the file and the line.
pub struct NamedRow<'a> {
    record: &'a csv::StringRecord,
    at: &'a [usize],
    names: &'a [&'a str],
    line: usize,
    path: &'a std::path::Path,
}

impl NamedRow<'_> {
    /// The cell of the `k`-th name, as written (empty when the row is short).
    pub fn text(&self, k: usize) -> &str {
        self.record.get(self.at[k]).unwrap_or("")
    }

    fn bad(&self, k: usize, what: &str) -> crate::error::Error {
        crate::error::Error::input(
            self.path,
            format!("line {}: {} is not {what}", self.line, self.names[k]),
        )
    }

    /// The cell of the `k`-th name as a finite number.
    ///
    /// # Errors
    /// Not a finite number.
    pub fn number(&self, k: usize) -> crate::error::Result<f64> {
        self.text(k)
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| self.bad(k, "a number"))
    }

    /// The cell of the `k`-th name as a whole number.
    ///
    /// # Errors
    /// Not a whole number.
    pub fn whole(&self, k: usize) -> crate::error::Result<u32> {
        self.text(k).parse().map_err(|_| self.bad(k, "a whole number"))
    }

    /// The cell of the `k`-th name: `None` when empty, else a whole number.
    ///
    /// # Errors
    /// Neither empty nor a whole number.
    pub fn optional_whole(&self, k: usize) -> crate::error::Result<Option<u32>> {
        if self.text(k).is_empty() {
            Ok(None)
        } else {
            self.whole(k).map(Some)
        }
    }

    /// The cell of the `k`-th name: `None` when empty, else a finite number.
    ///
    /// # Errors
    /// Neither empty nor a finite number.
    pub fn optional_number(&self, k: usize) -> crate::error::Result<Option<f64>> {
        if self.text(k).is_empty() {
            Ok(None)
        } else {
            self.number(k).map(Some)
        }
    }
}

/// Reads the CSV file at `path` by column names (in any order, extra columns ignored) and
/// turns each row into a `T`.
///
/// A large table without quotes (as the tables Caravan writes are) is read in pieces of whole
/// lines in parallel, each piece's rows in order; anything a piece cannot take as it is (a
/// row of another length, a cell `each` refuses, bytes that are not text) sends the whole file
/// through the one sequential reader, so that the error names the same line as it always did.
///
/// # Errors
/// An unreadable file, a missing column, or what `each` refuses, naming the file.
pub fn read_named_columns<T: Send>(
    path: &std::path::Path,
    names: &[&str],
    each: impl Fn(&NamedRow) -> crate::error::Result<T> + Sync,
) -> crate::error::Result<Vec<T>> {
    let bytes = std::fs::read(path).map_err(|e| crate::error::Error::input(path, e.to_string()))?;
    read_named_columns_of(path, &bytes, names, each)
}

/// [`read_named_columns`] of the bytes of the file at `path` already in memory (e.g. as they
/// were written); errors name `path`.
///
/// # Errors
/// As [`read_named_columns`], but for reading the file.
pub fn read_named_columns_of<T: Send>(
    path: &std::path::Path,
    bytes: &[u8],
    names: &[&str],
    each: impl Fn(&NamedRow) -> crate::error::Result<T> + Sync,
) -> crate::error::Result<Vec<T>> {
    let bad = |what: String| crate::error::Error::input(path, what);
    let mut reader = csv::Reader::from_reader(bytes);
    let header = reader.headers().map_err(|e| bad(e.to_string()))?.clone();
    let at: Vec<usize> = names
        .iter()
        .map(|n| {
            header
                .iter()
                .position(|h| h == *n)
                .ok_or_else(|| bad(format!("missing column {n}")))
        })
        .collect::<crate::error::Result<_>>()?;
    let body = &bytes[reader.position().byte() as usize..];
    let table = Table {
        path,
        names,
        at: &at,
        fields: header.len(),
    };
    match table.in_pieces(body, &each) {
        Some(rows) => Ok(rows),
        None => table.in_order(reader, &each),
    }
}

/// What [`read_named_columns`] reads by: the file, the names asked for, their columns, and
/// the number of fields every row has (the header's).
struct Table<'a> {
    path: &'a std::path::Path,
    names: &'a [&'a str],
    at: &'a [usize],
    fields: usize,
}

/// Bytes of rows from which [`Table::in_pieces`] reads in parallel (below, one reader).
const PIECES_FROM_BYTES: usize = 1 << 18;

impl Table<'_> {
    /// The rows after the header, one after another.
    fn in_order<T>(
        &self,
        mut reader: csv::Reader<&[u8]>,
        each: &impl Fn(&NamedRow) -> crate::error::Result<T>,
    ) -> crate::error::Result<Vec<T>> {
        let bad = |what: String| crate::error::Error::input(self.path, what);
        let mut out = Vec::new();
        // One record reused for every row (a new one per row was most of the time of reading).
        let mut record = csv::StringRecord::new();
        let mut line = 1;
        while reader.read_record(&mut record).map_err(|e| bad(e.to_string()))? {
            line += 1;
            out.push(each(&self.row(&record, line))?);
        }
        Ok(out)
    }

    /// The rows of `body` (the bytes after the header) read in pieces of whole lines in
    /// parallel, when it is large and holds no quote; `None` when it is small or quoted, or a
    /// piece meets anything but a clean row (then [`Table::in_order`] says what).
    fn in_pieces<T: Send>(
        &self,
        body: &[u8],
        each: &(impl Fn(&NamedRow) -> crate::error::Result<T> + Sync),
    ) -> Option<Vec<T>> {
        use rayon::prelude::*;
        if body.len() < PIECES_FROM_BYTES || body.contains(&b'"') {
            return None;
        }
        let pieces = whole_line_pieces(body, rayon::current_num_threads().max(1) * 2);
        let read: Vec<Option<Vec<T>>> = pieces
            .par_iter()
            .map(|piece| {
                let mut reader = csv::ReaderBuilder::new()
                    .has_headers(false)
                    .flexible(true)
                    .from_reader(*piece);
                let mut record = csv::StringRecord::new();
                let mut rows = Vec::new();
                while reader.read_record(&mut record).ok()? {
                    if record.len() != self.fields {
                        return None;
                    }
                    // The line is only for an error message, and an error sends the file
                    // through `in_order` again.
                    rows.push(each(&self.row(&record, 0)).ok()?);
                }
                Some(rows)
            })
            .collect();
        let mut out = Vec::new();
        for rows in read {
            out.extend(rows?);
        }
        Some(out)
    }

    fn row<'r>(&'r self, record: &'r csv::StringRecord, line: usize) -> NamedRow<'r> {
        NamedRow {
            record,
            at: self.at,
            names: self.names,
            line,
            path: self.path,
        }
    }
}

/// `bytes` cut into about `count` pieces that each end just after a line feed (the last where
/// the bytes end).
fn whole_line_pieces(bytes: &[u8], count: usize) -> Vec<&[u8]> {
    let mut pieces = Vec::with_capacity(count);
    let mut start = 0;
    for k in 1..count {
        let guess = (bytes.len() * k / count).max(start);
        let Some(feed) = bytes[guess..].iter().position(|&b| b == b'\n') else {
            break;
        };
        let end = guess + feed + 1;
        if end > start {
            pieces.push(&bytes[start..end]);
            start = end;
        }
    }
    pieces.push(&bytes[start..]);
    pieces
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A table of `rows` rows (`id,x,label`, x = id / 8) as text, lines ended by `ending`.
    fn table_text(rows: usize, ending: &str) -> String {
        let mut text = format!("label,id,x{ending}");
        for i in 0..rows {
            text.push_str(&format!("n{i},{i},{}{ending}", i as f64 / 8.0));
        }
        text
    }

    fn read_ids(path: &std::path::Path) -> crate::error::Result<Vec<(u32, f64)>> {
        read_named_columns(path, &["id", "x"], |row| Ok((row.whole(0)?, row.number(1)?)))
    }

    #[test]
    fn a_large_table_read_in_pieces_has_every_row_in_order() {
        // Source: definition (the rows as they were written, id and x = id / 8 exactly in
        // binary), for a table large enough to be read in pieces, with LF and CRLF endings,
        // and for a small one read in order.
        let dir = tempfile::tempdir().unwrap();
        for (rows, ending) in [(30_000usize, "\n"), (30_000, "\r\n"), (50, "\n")] {
            let text = table_text(rows, ending);
            let path = dir.path().join("t.csv");
            std::fs::write(&path, &text).unwrap();
            let want: Vec<(u32, f64)> = (0..rows).map(|i| (i as u32, i as f64 / 8.0)).collect();
            assert_eq!(read_ids(&path).unwrap(), want, "{rows} rows, {ending:?}");
            let body = &text.as_bytes()[text.find(ending).unwrap() + ending.len()..];
            let at = [1, 2];
            let table = Table {
                path: &path,
                names: &["id", "x"],
                at: &at,
                fields: 3,
            };
            let pieces = table.in_pieces(body, &|row: &NamedRow| Ok((row.whole(0)?, row.number(1)?)));
            assert_eq!(pieces.is_some(), rows > 1000, "read in pieces only when large");
        }
    }

    #[test]
    fn an_error_in_a_piece_names_the_line_as_a_reader_in_order_does() {
        // Source: definition (line 1 is the header, row k is line k + 1): a bad cell late in
        // a large table, and a row missing a field, are refused naming their line.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.csv");
        let mut text = table_text(30_000, "\n");
        text = text.replace("\nn25000,25000,3125\n", "\nn25000,25000,many\n");
        std::fs::write(&path, &text).unwrap();
        let err = read_ids(&path).unwrap_err().to_string();
        assert!(err.contains("line 25002: x is not a number"), "{err}");
        let short = table_text(30_000, "\n").replace("\nn20000,20000,2500\n", "\nn20000,20000\n");
        std::fs::write(&path, short).unwrap();
        let err = read_ids(&path).unwrap_err().to_string();
        assert!(err.contains("line: 20002") && err.contains("2 fields"), "{err}");
    }

    #[test]
    fn a_table_written_in_parallel_is_the_standard_formatter_line_by_line() {
        // Source: Rust's standard formatter (`{}` and `{:.3}`) line by line, in row order,
        // for tables shorter than one task, across tasks and across groups of tasks (40 000
        // rows), and empty.
        let columns: Vec<Column<(u32, f64)>> = vec![
            Column::shown("id", |r: &(u32, f64)| Some(r.0)),
            Column::fixed("value", 3, |r: &(u32, f64)| Some(r.1)),
        ];
        for n in [0usize, 5, ROWS_PER_TASK + 1, 40_000] {
            let rows: Vec<(u32, f64)> = (0..n).map(|i| (i as u32, (i as f64 * 0.37).sin() * 1e3)).collect();
            let mut out = Vec::new();
            write_table_in_parallel(&mut out, &columns, &rows).unwrap();
            let mut expected = String::from("id,value\n");
            for (id, v) in &rows {
                expected += &format!("{id},{v:.3}\n");
            }
            assert!(String::from_utf8(out).unwrap() == expected, "{n} rows");
        }
    }

    #[test]
    fn header_and_rows_come_from_the_same_columns() {
        // Source: construction (RFC 4180 layout: one header line, comma-separated cells, an
        // empty cell for a missing value).
        let columns: Vec<Column<(u32, Option<f64>)>> = vec![
            Column::shown("id", |r: &(u32, Option<f64>)| Some(r.0)),
            Column::fixed("value", 2, |r: &(u32, Option<f64>)| r.1),
        ];
        let mut out = Vec::new();
        write_table(&mut out, &columns, &[(1, Some(0.125)), (2, None)]).unwrap();
        assert_eq!(String::from_utf8(out).unwrap(), "id,value\n1,0.12\n2,\n");
    }

    #[test]
    fn fixed_decimals_match_the_standard_formatter() {
        // Reference: Rust's own `{:.N}` formatting (correctly rounded), on values around
        // every magnitude the tables print, exact ties, negative zero and non-finite values.
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut values = vec![
            0.0,
            -0.0,
            0.5,
            1.5,
            2.5,
            0.125,
            0.0005,
            -0.00004,
            1e12,
            1e-9,
            f64::NAN,
            f64::INFINITY,
        ];
        for _ in 0..200_000 {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let mantissa = (state >> 11) as f64 / (1u64 << 53) as f64;
            let exponent = (state % 17) as i32 - 6;
            let sign = if state & 1 == 0 { 1.0 } else { -1.0 };
            values.push(sign * mantissa * 10f64.powi(exponent));
        }
        for &v in &values {
            for decimals in 0..=6 {
                let mut ours = String::new();
                push_fixed(&mut ours, v, decimals);
                assert_eq!(ours, format!("{v:.decimals$}"), "{v:e} to {decimals} decimals");
            }
        }
    }
}
