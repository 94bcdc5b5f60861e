//! A log handed over as columns of numbers (a notebook's arrays): read as
//! the CSV log it would be, by the one CSV reader, so that it follows every
//! rule of a CSV log (column names, `--column` maps, `snr_db` for a missing
//! noise floor, the header block, the warnings).
//!
//! Each column is a name and its values; a NaN in a column of readings is an
//! empty cell (a reading that was not logged). The cells are written with
//! Rust's shortest round-trip formatting, so a value reads back as the same
//! number a CSV cell of that text gives. Rows are produced as the reader
//! asks for them: nothing is copied whole.

use std::io::{self, Read};

use super::{csv, Inner, LogReader, ReadOptions};
use crate::error::{CliError, CliResult};

/// The values of one column.
#[derive(Clone, Debug, PartialEq)]
pub enum Column {
    /// Whole numbers (a time column).
    Whole(Vec<i64>),
    /// Real numbers; NaN is an empty cell.
    Real(Vec<f64>),
}

impl Column {
    fn len(&self) -> usize {
        match self {
            Column::Whole(v) => v.len(),
            Column::Real(v) => v.len(),
        }
    }

    fn cell(&self, row: usize, out: &mut Vec<u8>) {
        use std::io::Write as _;
        // Writing into a Vec cannot fail.
        let _ = match self {
            Column::Whole(v) => match v.get(row) {
                Some(x) => write!(out, "{x}"),
                None => Ok(()),
            },
            Column::Real(v) => match v.get(row) {
                Some(x) if x.is_nan() => Ok(()),
                Some(x) => write!(out, "{x}"),
                None => Ok(()),
            },
        };
    }
}

/// A name that cannot be written into a CSV line or a header comment as
/// it is (a separator, a quote, a line break).
fn bad_text(s: &str) -> bool {
    s.contains([',', '"', '\n', '\r'])
}

/// Open the columns `columns` (name, values; all of one length) as a log
/// named `name`, with the header fields `header` (`key`, `value` as a CSV
/// header block writes them: `max_tx_dbm`, `14`); read as `opts` say.
pub fn open(
    name: &str,
    header: &[(String, String)],
    columns: Vec<(String, Column)>,
    opts: &ReadOptions,
) -> CliResult<LogReader> {
    let rows = columns.first().map_or(0, |(_, c)| c.len());
    for (n, c) in &columns {
        if bad_text(n) || n.trim().is_empty() {
            return Err(CliError::Input(format!(
                "{name}: column name '{}' cannot be a log column (empty, or a comma, quote or line break)",
                crate::error::printable(n)
            )));
        }
        if c.len() != rows {
            let first = columns.first().map_or("", |(n, _)| n.as_str());
            return Err(CliError::Input(format!(
                "{name}: column {n} has {} values, column {first} has {rows}: every column needs one value per record",
                c.len()
            )));
        }
    }
    let mut text = Vec::new();
    if !header.is_empty() {
        text.extend_from_slice(format!("# {}\n", csv::MAGIC).as_bytes());
        for (k, v) in header {
            if bad_text(k) || bad_text(v) || k.contains(':') {
                return Err(CliError::Input(format!(
                    "{name}: header field '{}' = '{}': a key or value with a line break, comma, quote or (key) colon",
                    crate::error::printable(k),
                    crate::error::printable(v)
                )));
            }
            text.extend_from_slice(format!("# {k}: {v}\n").as_bytes());
        }
    }
    let names: Vec<&str> = columns.iter().map(|(n, _)| n.as_str()).collect();
    text.extend_from_slice(names.join(",").as_bytes());
    text.push(b'\n');
    let source = Rows {
        columns: columns.into_iter().map(|(_, c)| c).collect(),
        rows,
        next: 0,
        buf: text,
        pos: 0,
    };
    let reader = csv::CsvReader::new(name.to_string(), Box::new(source), opts)?;
    Ok(LogReader {
        inner: Inner::Csv(Box::new(reader)),
    })
}

/// The CSV text of the columns, one row at a time.
struct Rows {
    columns: Vec<Column>,
    rows: usize,
    next: usize,
    buf: Vec<u8>,
    pos: usize,
}

impl Read for Rows {
    fn read(&mut self, out: &mut [u8]) -> io::Result<usize> {
        while self.pos >= self.buf.len() {
            if self.next >= self.rows {
                return Ok(0);
            }
            self.buf.clear();
            self.pos = 0;
            for (k, c) in self.columns.iter().enumerate() {
                if k > 0 {
                    self.buf.push(b',');
                }
                c.cell(self.next, &mut self.buf);
            }
            self.buf.push(b'\n');
            self.next += 1;
        }
        let rest = self.buf.get(self.pos..).unwrap_or_default();
        let n = rest.len().min(out.len());
        if let (Some(dst), Some(src)) = (out.get_mut(..n), rest.get(..n)) {
            dst.copy_from_slice(src);
        }
        self.pos += n;
        Ok(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cols() -> Vec<(String, Column)> {
        vec![
            ("t_ms".into(), Column::Whole(vec![0, 1000, 2000])),
            ("tx_dbm".into(), Column::Real(vec![14.0, 14.0, 11.5])),
            (
                "rssi_dbm".into(),
                Column::Real(vec![-97.25, f64::NAN, -101.0]),
            ),
            (
                "noise_dbm".into(),
                Column::Real(vec![-120.0, -120.0, -119.5]),
            ),
        ]
    }

    #[test]
    fn columns_read_as_the_csv_log_they_would_be() {
        let r = open("arrays", &[], cols(), &ReadOptions::default()).expect("opens");
        let recs: Vec<_> = r.map(|x| x.expect("a record")).collect();
        assert_eq!(recs.len(), 3);
        assert_eq!(recs[0].rssi_dbm, Some(-97.25));
        assert_eq!(
            recs[1].rssi_dbm, None,
            "NaN is a reading that was not logged"
        );
        assert_eq!(recs[2].t_ms, 2000);
        assert_eq!(recs[2].tx_dbm, Some(11.5));
    }

    #[test]
    fn header_fields_reach_the_log_header() {
        let h = [("max_tx_dbm".to_string(), "14".to_string())];
        let r = open("arrays", &h, cols(), &ReadOptions::default()).expect("opens");
        assert_eq!(r.header().and_then(|h| h.max_tx).map(|d| d.0), Some(14.0));
    }

    #[test]
    fn uneven_columns_and_bad_names_are_refused() {
        let mut c = cols();
        c[1].1 = Column::Real(vec![1.0]);
        let e = open("arrays", &[], c, &ReadOptions::default())
            .err()
            .expect("refused");
        assert!(e.to_string().contains("column tx_dbm has 1 values"), "{e}");
        let mut c = cols();
        c[0].0 = "t_ms,x".into();
        assert!(open("arrays", &[], c, &ReadOptions::default()).is_err());
    }

    #[test]
    fn a_fractional_time_is_the_csv_reader_error() {
        let mut c = cols();
        c[0].1 = Column::Real(vec![0.0, 1.5, 2.0]);
        let r = open("arrays", &[], c, &ReadOptions::default()).expect("opens");
        let errs: Vec<String> = r.filter_map(|x| x.err()).map(|e| e.to_string()).collect();
        assert_eq!(errs.len(), 1);
        assert!(errs[0].contains("arrays:3"), "{}", errs[0]);
    }
}
