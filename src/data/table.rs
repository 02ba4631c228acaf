//! Reading a CSV file into a table of text cells.
//!
//! Nothing is interpreted here: whether a column is numeric or text, and which
//! cells count as missing, is decided later by the encoding, once it is known
//! which columns are used. This module only guarantees a rectangular table with
//! unique column names and the file line of every row, so later errors can
//! point at the line a person would open in an editor.
//!
//! The file is read as a stream and each column kept as a [`CodedColumn`], so
//! a large file costs about a byte per cell rather than a `String` per cell.

use std::cell::RefCell;
use std::io::Read;
use std::rc::Rc;

use super::coded_column::{CodedColumn, ColumnBuilder, PushError};
use super::error::DataError;

/// A CSV file as text: one header row and rectangular data rows.
#[derive(Clone, Debug)]
pub struct Table {
    /// Column names from the header row, trimmed of surrounding whitespace.
    pub headers: Vec<String>,
    /// One per header: its cells as written in the file.
    columns: Vec<CodedColumn>,
    /// 1-based file line on which each row starts.
    lines: Vec<u64>,
}

impl Table {
    /// Position of the column with this exact name.
    pub(crate) fn column(&self, name: &str) -> Option<usize> {
        self.headers.iter().position(|h| h == name)
    }

    /// Number of data rows.
    pub fn row_count(&self) -> usize {
        self.lines.len()
    }

    /// The cell of row `row` in column `col`, as written in the file.
    pub(crate) fn cell(&self, row: usize, col: usize) -> &str {
        self.columns[col].cell(row)
    }

    /// The cells of row `row`, in column order.
    pub(crate) fn row(&self, row: usize) -> impl Iterator<Item = &str> {
        self.columns.iter().map(move |column| column.cell(row))
    }

    /// Column `col`'s distinct texts and each row's code among them.
    pub(crate) fn coded(&self, col: usize) -> &CodedColumn {
        &self.columns[col]
    }

    /// File line of row `row`, for messages.
    pub(crate) fn line(&self, row: usize) -> u64 {
        self.lines[row]
    }

    /// File line of every row.
    pub fn lines(&self) -> &[u64] {
        &self.lines
    }
}

/// Read CSV text (comma-separated, optionally quoted, LF or CRLF line ends,
/// optional UTF-8 byte-order mark) into a [`Table`], as a stream.
///
/// The first record is the header row. Blank lines are skipped. A file with a
/// header and no data rows gives an empty table; an empty file, a row with the
/// wrong number of cells, invalid UTF-8, and empty or repeated column names are
/// errors naming the line or column.
pub fn read_table(reader: impl Read) -> Result<Table, DataError> {
    let window = Rc::new(RefCell::new(Window::default()));
    let source = Recorded {
        inner: without_byte_order_mark(reader)?,
        window: window.clone(),
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        // Ragged rows are checked below, to report them in our own words.
        .flexible(true)
        .buffer_capacity(READ_BUFFER)
        .from_reader(source);
    let mut lines = LineCounter::new(window);

    let header_record = reader
        .byte_headers()
        .map_err(|e| csv_error(e, &mut lines))?
        .clone();
    if header_record.is_empty() {
        return Err(DataError::EmptyFile);
    }
    let header_line = lines.record_line(header_record.position());
    let headers = header_record
        .iter()
        .map(|cell| match std::str::from_utf8(cell) {
            Ok(name) => Ok(name.trim().to_string()),
            Err(_) => Err(DataError::InvalidUtf8 { line: header_line }),
        })
        .collect::<Result<Vec<_>, _>>()?;
    check_headers(&headers)?;

    let mut columns: Vec<ColumnBuilder> =
        headers.iter().map(|_| ColumnBuilder::default()).collect();
    let mut row_lines = Vec::new();
    let mut record = csv::ByteRecord::new();
    while reader
        .read_byte_record(&mut record)
        .map_err(|e| csv_error(e, &mut lines))?
    {
        let line = lines.record_line(record.position());
        if record.len() != headers.len() {
            return Err(DataError::RaggedRow {
                line,
                found: record.len(),
                expected: headers.len(),
            });
        }
        for (col, (column, cell)) in columns.iter_mut().zip(&record).enumerate() {
            column.push(cell).map_err(|error| match error {
                PushError::InvalidUtf8 => DataError::InvalidUtf8 { line },
                PushError::TooManyDistinct => DataError::TooManyDistinct {
                    line,
                    column: headers[col].clone(),
                },
            })?;
        }
        row_lines.push(line);
    }
    Ok(Table {
        headers,
        columns: columns.into_iter().map(ColumnBuilder::finish).collect(),
        lines: row_lines,
    })
}

/// Bytes asked of the file at a time.
const READ_BUFFER: usize = 1 << 16;

/// The stream with a leading UTF-8 byte-order mark removed: spreadsheet programs
/// often write one, which would otherwise become part of the first column's name.
/// The column names of a CSV file's header row, read as `read_table` reads them
/// (byte-order mark dropped, names trimmed) without reading any data row: the plan
/// checks a document's column names against them.
pub(crate) fn read_header(reader: impl Read) -> Result<Vec<String>, DataError> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(without_byte_order_mark(reader)?);
    let header = reader.byte_headers().map_err(|error| DataError::Read {
        message: error.to_string(),
    })?;
    if header.is_empty() {
        return Err(DataError::EmptyFile);
    }
    Ok(header
        .iter()
        .map(|cell| String::from_utf8_lossy(cell).trim().to_string())
        .collect())
}

fn without_byte_order_mark(mut reader: impl Read) -> Result<impl Read, DataError> {
    const MARK: &[u8] = b"\xEF\xBB\xBF";
    let mut head = Vec::with_capacity(MARK.len());
    (&mut reader)
        .take(MARK.len() as u64)
        .read_to_end(&mut head)
        .map_err(|error| DataError::Read {
            message: error.to_string(),
        })?;
    if head == MARK {
        head.clear();
    }
    Ok(std::io::Cursor::new(head).chain(reader))
}

/// The bytes the CSV reader has taken from the stream but the [`LineCounter`] has
/// not yet passed. Shared between the two because the CSV reader owns its input.
#[derive(Default)]
struct Window {
    /// Stream offset of `bytes[0]`.
    start: u64,
    bytes: Vec<u8>,
}

impl Window {
    fn byte(&self, offset: u64) -> Option<u8> {
        let index = usize::try_from(offset.checked_sub(self.start)?).ok()?;
        self.bytes.get(index).copied()
    }

    /// Forgets the bytes before `offset`, once they are at least half the window, so
    /// each byte is moved at most a few times.
    fn discard_before(&mut self, offset: u64) {
        let passed = usize::try_from(offset.saturating_sub(self.start))
            .unwrap_or(usize::MAX)
            .min(self.bytes.len());
        if passed > 0 && passed >= self.bytes.len() / 2 {
            self.bytes.drain(..passed);
            self.start += passed as u64;
        }
    }
}

/// The input stream, recording every byte read into the shared [`Window`].
struct Recorded<R> {
    inner: R,
    window: Rc<RefCell<Window>>,
}

impl<R: Read> Read for Recorded<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.window.borrow_mut().bytes.extend_from_slice(&buf[..n]);
        Ok(n)
    }
}

/// Finds the file line on which a record starts.
///
/// The csv crate's own line numbers are taken where the reader stopped after
/// the previous record, which lies before the `\n` of a CRLF line end and
/// before skipped blank lines; so its byte offset is moved past line-end bytes
/// and the line breaks before it are counted here.
struct LineCounter {
    window: Rc<RefCell<Window>>,
    /// Bytes before this offset have been counted.
    offset: u64,
    /// Line breaks seen before `offset`.
    breaks: u64,
}

impl LineCounter {
    fn new(window: Rc<RefCell<Window>>) -> Self {
        LineCounter {
            window,
            offset: 0,
            breaks: 0,
        }
    }

    /// 1-based line of the record whose reading began at `position`.
    /// Records come in file order, so counting carries on from the last call.
    fn record_line(&mut self, position: Option<&csv::Position>) -> u64 {
        let mut window = self.window.borrow_mut();
        let mut start = position.map_or(0, csv::Position::byte).max(self.offset);
        while matches!(window.byte(start), Some(b'\r' | b'\n')) {
            start += 1;
        }
        for i in self.offset..start {
            // A break is LF, or a CR not followed by LF (old Mac line ends).
            let is_break = match window.byte(i) {
                Some(b'\n') => true,
                Some(b'\r') => window.byte(i + 1) != Some(b'\n'),
                _ => false,
            };
            self.breaks += u64::from(is_break);
        }
        self.offset = start;
        window.discard_before(start);
        self.breaks + 1
    }
}

fn check_headers(headers: &[String]) -> Result<(), DataError> {
    for (i, name) in headers.iter().enumerate() {
        if name.is_empty() {
            return Err(DataError::EmptyHeader { column: i + 1 });
        }
        if let Some(first) = headers[..i].iter().position(|h| h == name) {
            return Err(DataError::DuplicateHeader {
                name: name.clone(),
                first: first + 1,
                second: i + 1,
            });
        }
    }
    Ok(())
}

fn csv_error(err: csv::Error, lines: &mut LineCounter) -> DataError {
    DataError::Csv {
        line: lines.record_line(err.position()),
        message: err.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cells(t: &Table) -> Vec<Vec<&str>> {
        (0..t.row_count()).map(|r| t.row(r).collect()).collect()
    }

    #[test]
    fn reads_headers_rows_and_lines() {
        let t = read_table(b"a,b\n1,2\n3,4\n".as_slice()).unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
        assert_eq!(cells(&t), vec![vec!["1", "2"], vec!["3", "4"]]);
        assert_eq!(t.lines(), vec![2, 3]);
        assert_eq!(t.column("b"), Some(1));
        assert_eq!(t.column("c"), None);
    }

    #[test]
    fn quoted_fields_keep_commas_quotes_and_newlines() {
        let t = read_table(
            b"name,note\n\"Smith, J\",\"said \"\"hi\"\"\"\n\"two\nlines\",x\nlast,y\n".as_slice(),
        )
        .unwrap();
        assert_eq!(cells(&t)[0], vec!["Smith, J", "said \"hi\""]);
        assert_eq!(cells(&t)[1], vec!["two\nlines", "x"]);
        // The quoted newline makes the record after it start one line later.
        assert_eq!(t.lines(), vec![2, 3, 5]);
    }

    #[test]
    fn crlf_line_ends_are_not_part_of_cells() {
        let t = read_table(b"a,b\r\n1,2\r\n3,4\r\n".as_slice()).unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
        assert_eq!(cells(&t), vec![vec!["1", "2"], vec!["3", "4"]]);
        assert_eq!(t.lines(), vec![2, 3]);
    }

    #[test]
    fn byte_order_mark_and_header_spaces_are_removed() {
        let t = read_table(b"\xEF\xBB\xBFa , b\n1,2\n".as_slice()).unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
    }

    #[test]
    fn blank_lines_are_skipped_but_counted() {
        let t = read_table(b"\na,b\n1,2\n\n\n3,4\n".as_slice()).unwrap();
        assert_eq!(t.row_count(), 2);
        assert_eq!(t.lines(), vec![3, 6]);
        let t = read_table(b"a,b\r\n\r\n1,2\r\n".as_slice()).unwrap();
        assert_eq!(t.lines(), vec![3]);
    }

    #[test]
    fn ragged_row_after_crlf_and_quoted_newline_names_its_line() {
        let err = read_table(b"a,b\r\n\"x\r\ny\",1\r\n2\r\n".as_slice()).unwrap_err();
        assert!(
            matches!(err, DataError::RaggedRow { line: 4, .. }),
            "{err:?}"
        );
    }

    #[test]
    fn ragged_row_error_names_its_line() {
        let err = read_table(b"a,b,c\n1,2,3\n4,5\n6,7,8\n".as_slice()).unwrap_err();
        assert_eq!(
            err,
            DataError::RaggedRow {
                line: 3,
                found: 2,
                expected: 3
            }
        );
        assert!(err.to_string().starts_with("line 3 has 2 cells"), "{err}");
    }

    #[test]
    fn empty_file_is_an_error() {
        assert_eq!(
            read_table(b"".as_slice()).unwrap_err(),
            DataError::EmptyFile
        );
        assert_eq!(
            read_table(b"\n\n".as_slice()).unwrap_err(),
            DataError::EmptyFile
        );
    }

    #[test]
    fn header_only_gives_an_empty_table() {
        let t = read_table(b"a,b\n".as_slice()).unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
        assert_eq!(t.row_count(), 0);
        assert!(t.lines().is_empty());
    }

    #[test]
    fn invalid_utf8_names_its_line() {
        let err = read_table(b"a,b\n1,2\n3,\xff\xfe\n".as_slice()).unwrap_err();
        assert_eq!(err, DataError::InvalidUtf8 { line: 3 });
    }

    #[test]
    fn empty_and_repeated_column_names_are_errors() {
        assert_eq!(
            read_table(b"a,,c\n1,2,3\n".as_slice()).unwrap_err(),
            DataError::EmptyHeader { column: 2 }
        );
        assert_eq!(
            read_table(b"a,b,a\n1,2,3\n".as_slice()).unwrap_err(),
            DataError::DuplicateHeader {
                name: "a".into(),
                first: 1,
                second: 3
            }
        );
    }

    /// A reader that hands out at most `chunk` bytes per call, as a pipe or a slow
    /// disk may, so records and line ends straddle the reads.
    struct Trickle<'a> {
        bytes: &'a [u8],
        chunk: usize,
    }

    impl Read for Trickle<'_> {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let n = self.chunk.min(buf.len()).min(self.bytes.len());
            buf[..n].copy_from_slice(&self.bytes[..n]);
            self.bytes = &self.bytes[n..];
            Ok(n)
        }
    }

    #[test]
    fn lines_are_the_same_however_the_stream_is_cut() {
        let bytes: &[u8] = b"\xEF\xBB\xBFa,b\r\n\r\n\"x\r\ny\",1\r\n2,3\r4,5\n\n6,7\n";
        for chunk in [1, 2, 3, 5, 64] {
            let t = read_table(Trickle { bytes, chunk }).unwrap();
            assert_eq!(t.headers, vec!["a", "b"], "chunk {chunk}");
            assert_eq!(
                cells(&t),
                vec![
                    vec!["x\r\ny", "1"],
                    vec!["2", "3"],
                    vec!["4", "5"],
                    vec!["6", "7"]
                ],
                "chunk {chunk}"
            );
            assert_eq!(t.lines(), [3, 5, 6, 8], "chunk {chunk}");
        }
    }

    #[test]
    fn a_file_larger_than_the_read_buffer_keeps_its_lines() {
        // Rows of varying length so that reads end at every kind of place.
        let mut csv = String::from("id,note\r\n");
        let mut expected = Vec::new();
        let mut line = 2;
        for i in 0..20_000 {
            if i % 7 == 0 {
                csv.push_str("\r\n");
                line += 1;
            }
            expected.push(line);
            if i % 11 == 0 {
                csv.push_str(&format!("{i},\"two\nlines {i}\"\r\n"));
                line += 2;
            } else {
                csv.push_str(&format!("{i},{}\r\n", "n".repeat(i % 13)));
                line += 1;
            }
        }
        assert!(csv.len() > 4 * READ_BUFFER);
        let t = read_table(csv.as_bytes()).unwrap();
        assert_eq!(t.lines(), expected.as_slice());
        assert_eq!(t.cell(11, 1), "two\nlines 11");
        assert_eq!(t.cell(19_999, 0), "19999");
    }

    #[test]
    fn a_read_error_is_reported() {
        struct Failing;
        impl Read for Failing {
            fn read(&mut self, _: &mut [u8]) -> std::io::Result<usize> {
                Err(std::io::Error::other("disk on fire"))
            }
        }
        let err = read_table(Failing).unwrap_err();
        assert!(err.to_string().contains("disk on fire"), "{err}");
    }
}
