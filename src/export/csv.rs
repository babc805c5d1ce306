//! Numeric tables as CSV, fast: a frequency column and any number of
//! value columns, written into one string or to a stream.
//!
//! Every number is written by `zmij` as the shortest decimal that parses
//! back to the identical double (an algorithm based on Schubfach:
//! Giulietti, "The Schubfach way to render doubles", 2020), so nothing is
//! lost and no precision has to be chosen per column. Measured on the
//! project's machine over a million values like a sweep's (gains in dB,
//! delays in seconds): 50-57 ns per number, against 77-96 ns for the
//! `ryu` crate and 150-205 ns for `format!("{:.9e}")`, which the sweep
//! used before (`benches/sweep_cli.rs` times the whole table).
//!
//! A value that is not finite is never written as `NaN` or `inf`: its
//! field is left empty, the CSV marker for a missing value (callers that
//! give only finite values, like [`crate::analysis::trace`]'s, never see
//! it).

use rayon::prelude::*;

/// Why a table was not written.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum CsvError {
    /// A value column whose length is not that of the frequency column.
    #[error("column {name:?} has {len} values for {rows} frequencies; every column needs one value per frequency")]
    Length {
        /// The column.
        name: String,
        /// Its number of values.
        len: usize,
        /// The number of frequencies.
        rows: usize,
    },
    /// A column name that would need quoting.
    #[error("column name {name:?}: expected a plain name without comma, quote or line break")]
    Name {
        /// The name given.
        name: String,
    },
    /// The output stream refused the text.
    #[error("writing the table: {message}")]
    Write {
        /// What kind of failure.
        kind: std::io::ErrorKind,
        /// The system's message.
        message: String,
    },
}

/// Name of the first column.
pub const FREQ_COLUMN: &str = "freq_hz";

/// Characters a bytes estimate allows per number: a sign, 17 significant
/// digits, a point and an exponent of up to four characters fill 24.
const NUMBER_BYTES: usize = 24;

/// Rows one parallel task writes per round: large enough that a task's
/// cost (about half a millisecond) dwarfs rayon's scheduling of it, small
/// enough that the buffers, reused round after round, stay a few hundred
/// kilobytes: a table written to a stream touches no fresh memory per
/// row (page faults cost the command line about as much as the
/// formatting itself, measured on a 100,000-point sweep).
const BLOCK_ROWS: usize = 4096;

/// The table as CSV: a header `freq_hz,<names>` and one line per
/// frequency, each value written by zmij (round-trips exactly), an empty
/// field for a value that is not finite, lines ended by `\n`. Blocks of
/// rows are written on rayon's threads; the text does not depend on
/// their number.
pub fn sweep_csv(freqs_hz: &[f64], columns: &[(&str, &[f64])]) -> Result<String, CsvError> {
    series_csv(FREQ_COLUMN, freqs_hz, columns)
}

/// [`sweep_csv`] with another first column than `freq_hz` (a time
/// series: `time_s`).
pub fn series_csv(first: &str, x: &[f64], columns: &[(&str, &[f64])]) -> Result<String, CsvError> {
    check(x, columns)?;
    let mut out = String::with_capacity((x.len() + 1) * (columns.len() + 1) * (NUMBER_BYTES + 1));
    emit(first, x, columns, &mut |text| {
        out.push_str(text);
        Ok(())
    })
    .map_err(write_error)?;
    Ok(out)
}

/// [`sweep_csv`] written to `out` block by block (one `write_all` per
/// block of 4,096 rows), for a table too long to hold twice.
pub fn write_sweep_csv<W: std::io::Write + ?Sized>(
    out: &mut W,
    freqs_hz: &[f64],
    columns: &[(&str, &[f64])],
) -> Result<(), CsvError> {
    check(freqs_hz, columns)?;
    emit(FREQ_COLUMN, freqs_hz, columns, &mut |text| {
        out.write_all(text.as_bytes())
    })
    .map_err(write_error)
}

/// The header line of a table with these value columns (`freq_hz,` and
/// the names, `\n`-ended), for a caller that writes the rows itself
/// ([`append_csv_rows`]).
pub fn csv_header(names: &[&str]) -> Result<String, CsvError> {
    let columns: Vec<(&str, &[f64])> = names.iter().map(|&n| (n, &[][..])).collect();
    check(&[], &columns)?;
    let mut header = String::new();
    emit(FREQ_COLUMN, &[], &columns, &mut |text| {
        header.push_str(text);
        Ok(())
    })
    .map_err(write_error)?;
    Ok(header)
}

/// Appends the lines of the rows of `freqs_hz` and `columns` (no header)
/// to `out`, as [`sweep_csv`] writes them: a table written run by run
/// with this is the same text.
pub fn append_csv_rows(
    out: &mut String,
    freqs_hz: &[f64],
    columns: &[(&str, &[f64])],
) -> Result<(), CsvError> {
    check(freqs_hz, columns)?;
    write_rows(out, 0..freqs_hz.len(), freqs_hz, columns);
    Ok(())
}

fn write_error(e: std::io::Error) -> CsvError {
    CsvError::Write {
        kind: e.kind(),
        message: e.to_string(),
    }
}

/// Every column as long as the frequencies, every name plain.
fn check(freqs_hz: &[f64], columns: &[(&str, &[f64])]) -> Result<(), CsvError> {
    let rows = freqs_hz.len();
    for &(name, values) in columns {
        if name.contains([',', '"', '\n', '\r']) {
            return Err(CsvError::Name {
                name: name.to_string(),
            });
        }
        if values.len() != rows {
            return Err(CsvError::Length {
                name: name.to_string(),
                len: values.len(),
                rows,
            });
        }
    }
    Ok(())
}

/// Gives the header and then the rows, in order, to `sink`, in rounds of
/// one block of rows per rayon thread written in parallel into buffers
/// that every round reuses.
fn emit(
    first: &str,
    freqs_hz: &[f64],
    columns: &[(&str, &[f64])],
    sink: &mut dyn FnMut(&str) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let mut header = String::from(first);
    for (name, _) in columns {
        header.push(',');
        header.push_str(name);
    }
    header.push('\n');
    sink(&header)?;
    let rows = freqs_hz.len();
    let tasks = rayon::current_num_threads().max(1);
    let mut buffers = vec![String::new(); tasks.min(rows.div_ceil(BLOCK_ROWS))];
    for round in (0..rows).step_by(tasks * BLOCK_ROWS) {
        buffers.par_iter_mut().enumerate().for_each(|(k, buffer)| {
            let start = rows.min(round + k * BLOCK_ROWS);
            buffer.clear();
            write_rows(
                buffer,
                start..rows.min(start + BLOCK_ROWS),
                freqs_hz,
                columns,
            );
        });
        for buffer in &buffers {
            sink(buffer)?;
        }
    }
    Ok(())
}

/// Appends the lines of the rows in `range` to `out`.
fn write_rows(
    out: &mut String,
    range: std::ops::Range<usize>,
    freqs_hz: &[f64],
    columns: &[(&str, &[f64])],
) {
    out.reserve(range.len() * (columns.len() + 1) * (NUMBER_BYTES + 1));
    let mut buffer = zmij::Buffer::new();
    let mut number = |out: &mut String, v: f64| {
        if v.is_finite() {
            out.push_str(buffer.format_finite(v));
        }
    };
    for i in range {
        number(out, freqs_hz[i]);
        for (_, values) in columns {
            out.push(',');
            number(out, values[i]);
        }
        out.push('\n');
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Reads a table back with the `csv` crate: header and rows, empty
    /// fields as `None`.
    fn read(text: &str) -> (Vec<String>, Vec<Vec<Option<f64>>>) {
        let mut reader = ::csv::ReaderBuilder::new().from_reader(text.as_bytes());
        let header = reader
            .headers()
            .unwrap()
            .iter()
            .map(str::to_string)
            .collect();
        let rows = reader
            .records()
            .map(|r| {
                r.unwrap()
                    .iter()
                    .map(|field| (!field.is_empty()).then(|| field.parse().unwrap()))
                    .collect()
            })
            .collect();
        (header, rows)
    }

    #[test]
    fn values_round_trip_through_a_csv_reader() {
        // Awkward doubles: subnormal, largest, negative zero, integers,
        // values with 17 significant digits, and a log-spaced grid.
        let freqs: Vec<f64> = (0..50).map(|i| 300.0 * 1.1f64.powi(i)).collect();
        let a: Vec<f64> = (0..50)
            .map(|i| match i {
                0 => f64::from_bits(1),
                1 => f64::MAX,
                2 => -0.0,
                3 => -6.0,
                4 => 0.1 + 0.2,
                i => -(i as f64).ln() * 12.345_678_901_234_567,
            })
            .collect();
        let b: Vec<f64> = (0..50).map(|i| 1e-4 / (1.0 + i as f64).powi(3)).collect();
        let text = sweep_csv(&freqs, &[("a_db", &a), ("b_s", &b)]).unwrap();
        let (header, rows) = read(&text);
        assert_eq!(header, ["freq_hz", "a_db", "b_s"]);
        assert_eq!(rows.len(), freqs.len());
        for (i, row) in rows.iter().enumerate() {
            let want = [freqs[i], a[i], b[i]];
            for (got, want) in row.iter().zip(want) {
                // Bit for bit: the shortest round-trip form parses back
                // to the same double (the sign of zero included).
                assert_eq!(got.map(f64::to_bits), Some(want.to_bits()), "row {i}");
            }
        }
        assert!(text.ends_with('\n') && !text.contains("\n\n"));
    }

    #[test]
    fn no_nan_or_infinity_is_ever_written() {
        let freqs = [1.0, 2.0, 3.0, f64::NAN];
        let v = [f64::NAN, f64::INFINITY, f64::NEG_INFINITY, 4.0];
        let text = sweep_csv(&freqs, &[("v", &v)]).unwrap();
        let lower = text.to_ascii_lowercase();
        assert!(!lower.contains("nan") && !lower.contains("inf"), "{text}");
        let (_, rows) = read(&text);
        assert_eq!(
            rows,
            vec![
                vec![Some(1.0), None],
                vec![Some(2.0), None],
                vec![Some(3.0), None],
                vec![None, Some(4.0)],
            ]
        );
    }

    fn pool(threads: usize) -> rayon::ThreadPool {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
    }

    #[test]
    fn blocks_join_to_the_same_text_on_any_thread_count_and_stream() {
        // Several rounds of blocks, the last one short.
        let n = 3 * BLOCK_ROWS + 17;
        let freqs: Vec<f64> = (0..n).map(|i| 1.0 + i as f64 / 7.0).collect();
        let v: Vec<f64> = freqs.iter().map(|f| -f.ln() / 3.0).collect();
        let columns = [("v", &v[..])];
        let one = pool(1).install(|| sweep_csv(&freqs, &columns)).unwrap();
        let three = pool(3).install(|| sweep_csv(&freqs, &columns)).unwrap();
        assert_eq!(one, three);
        let mut bytes = Vec::new();
        pool(2)
            .install(|| write_sweep_csv(&mut bytes, &freqs, &columns))
            .unwrap();
        assert_eq!(bytes, one.as_bytes());
        let (_, rows) = read(&one);
        assert_eq!(rows.len(), n);
        for (i, row) in rows.iter().enumerate() {
            assert_eq!(row, &[Some(freqs[i]), Some(v[i])], "row {i}");
        }
    }

    /// A stream that takes `room` bytes and then refuses.
    struct Full {
        room: usize,
    }

    impl std::io::Write for Full {
        fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
            if self.room == 0 {
                return Err(std::io::Error::new(
                    std::io::ErrorKind::BrokenPipe,
                    "closed",
                ));
            }
            let n = buf.len().min(self.room);
            self.room -= n;
            Ok(n)
        }

        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    #[test]
    fn a_refusing_stream_is_an_error() {
        let freqs = [1.0, 2.0];
        let err = write_sweep_csv(&mut Full { room: 10 }, &freqs, &[("v", &freqs)]).unwrap_err();
        assert!(
            matches!(
                err,
                CsvError::Write {
                    kind: std::io::ErrorKind::BrokenPipe,
                    ..
                }
            ),
            "{err:?}"
        );
    }

    #[test]
    fn a_table_written_run_by_run_is_the_same_text() {
        let freqs: Vec<f64> = (0..100).map(|i| 10.0 + i as f64).collect();
        let v: Vec<f64> = freqs.iter().map(|f| f.sqrt()).collect();
        let whole = sweep_csv(&freqs, &[("v", &v)]).unwrap();
        let mut runs = csv_header(&["v"]).unwrap();
        for (f, v) in freqs.chunks(7).zip(v.chunks(7)) {
            append_csv_rows(&mut runs, f, &[("v", v)]).unwrap();
        }
        assert_eq!(runs, whole);
        assert!(csv_header(&["a\nb"]).is_err());
        assert!(append_csv_rows(&mut runs, &freqs, &[("v", &v[1..])]).is_err());
    }

    #[test]
    fn refuses_ragged_columns_and_names_that_need_quoting() {
        assert_eq!(
            sweep_csv(&[1.0, 2.0], &[("v", &[1.0])]),
            Err(CsvError::Length {
                name: "v".into(),
                len: 1,
                rows: 2
            })
        );
        assert_eq!(
            sweep_csv(&[1.0], &[("a,b", &[1.0])]),
            Err(CsvError::Name { name: "a,b".into() })
        );
        assert_eq!(sweep_csv(&[], &[("v", &[])]).unwrap(), "freq_hz,v\n");
    }
}
