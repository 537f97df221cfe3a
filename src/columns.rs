//! CSV tables written from one list of columns: each column carries its name and how it
//! prints a row's value, so a header and its rows cannot drift apart when a column is added.
//! Numbers go through [`crate::tracks::push_fixed`] (fixed decimals, the standard formatter's
//! digits without its slow path), so outputs are byte-identical between runs.

use crate::tracks::push_fixed;
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
        for (k, c) in columns.iter().enumerate() {
            if k > 0 {
                line.push(',');
            }
            (c.print)(row, &mut line);
        }
        line.push('\n');
        out.write_all(line.as_bytes())?;
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

#[cfg(test)]
mod tests {
    use super::*;

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
}
