//! Reading a CSV file into a table of text cells.
//!
//! Nothing is interpreted here: whether a column is numeric or text, and which
//! cells count as missing, is decided later by the encoding, once it is known
//! which columns are used. This module only guarantees a rectangular table with
//! unique column names and the file line of every row, so later errors can
//! point at the line a person would open in an editor.

use super::error::DataError;

/// A CSV file as text: one header row and rectangular data rows.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Table {
    /// Column names from the header row, trimmed of surrounding whitespace.
    pub headers: Vec<String>,
    /// Data rows, each with one cell per header, as written in the file.
    pub rows: Vec<Vec<String>>,
    /// 1-based file line on which each row starts.
    pub lines: Vec<u64>,
}

impl Table {
    /// Position of the column with this exact name.
    pub fn column(&self, name: &str) -> Option<usize> {
        self.headers.iter().position(|h| h == name)
    }

    /// File line of row `row`, for messages. Tables built by hand may leave
    /// `lines` empty; their rows are then taken to follow a header on line 1.
    pub fn line(&self, row: usize) -> u64 {
        self.lines.get(row).copied().unwrap_or(row as u64 + 2)
    }
}

/// Read CSV bytes (comma-separated, optionally quoted, LF or CRLF line ends,
/// optional UTF-8 byte-order mark) into a [`Table`].
///
/// The first record is the header row. Blank lines are skipped. A file with a
/// header and no data rows gives an empty table; an empty file, a row with the
/// wrong number of cells, invalid UTF-8, and empty or repeated column names are
/// errors naming the line or column.
pub fn read_table(bytes: &[u8]) -> Result<Table, DataError> {
    // Spreadsheet programs often write a byte-order mark, which would
    // otherwise become part of the first column's name.
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        // Ragged rows are checked below, to report them in our own words.
        .flexible(true)
        .from_reader(bytes);
    let mut lines = LineCounter::new(bytes);

    let header_record = reader
        .byte_headers()
        .map_err(|e| csv_error(e, &mut lines))?
        .clone();
    if header_record.is_empty() {
        return Err(DataError::EmptyFile);
    }
    let header_line = lines.record_line(header_record.position());
    let headers = utf8_cells(&header_record, header_line)?
        .into_iter()
        .map(|h| h.trim().to_string())
        .collect::<Vec<_>>();
    check_headers(&headers)?;

    let mut rows = Vec::new();
    let mut row_lines = Vec::new();
    for record in reader.byte_records() {
        let record = record.map_err(|e| csv_error(e, &mut lines))?;
        let line = lines.record_line(record.position());
        if record.len() != headers.len() {
            return Err(DataError::RaggedRow {
                line,
                found: record.len(),
                expected: headers.len(),
            });
        }
        rows.push(utf8_cells(&record, line)?);
        row_lines.push(line);
    }
    Ok(Table {
        headers,
        rows,
        lines: row_lines,
    })
}

/// Finds the file line on which a record starts.
///
/// The csv crate's own line numbers are taken where the reader stopped after
/// the previous record, which lies before the `\n` of a CRLF line end and
/// before skipped blank lines; so its byte offset is moved past line-end bytes
/// and the line breaks before it are counted here.
struct LineCounter<'a> {
    bytes: &'a [u8],
    /// Bytes before this offset have been counted.
    offset: usize,
    /// Line breaks seen before `offset`.
    breaks: u64,
}

impl<'a> LineCounter<'a> {
    fn new(bytes: &'a [u8]) -> Self {
        LineCounter {
            bytes,
            offset: 0,
            breaks: 0,
        }
    }

    /// 1-based line of the record whose reading began at `position`.
    /// Records come in file order, so counting carries on from the last call.
    fn record_line(&mut self, position: Option<&csv::Position>) -> u64 {
        let mut start = position.map_or(0, |p| p.byte() as usize).max(self.offset);
        while matches!(self.bytes.get(start), Some(b'\r' | b'\n')) {
            start += 1;
        }
        for i in self.offset..start.min(self.bytes.len()) {
            // A break is LF, or a CR not followed by LF (old Mac line ends).
            let is_break = match self.bytes[i] {
                b'\n' => true,
                b'\r' => self.bytes.get(i + 1) != Some(&b'\n'),
                _ => false,
            };
            self.breaks += u64::from(is_break);
        }
        self.offset = start;
        self.breaks + 1
    }
}

fn utf8_cells(record: &csv::ByteRecord, line: u64) -> Result<Vec<String>, DataError> {
    record
        .iter()
        .map(|cell| {
            std::str::from_utf8(cell)
                .map(str::to_string)
                .map_err(|_| DataError::InvalidUtf8 { line })
        })
        .collect()
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

    #[test]
    fn reads_headers_rows_and_lines() {
        let t = read_table(b"a,b\n1,2\n3,4\n").unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
        assert_eq!(t.rows, vec![vec!["1", "2"], vec!["3", "4"]]);
        assert_eq!(t.lines, vec![2, 3]);
        assert_eq!(t.column("b"), Some(1));
        assert_eq!(t.column("c"), None);
    }

    #[test]
    fn quoted_fields_keep_commas_quotes_and_newlines() {
        let t =
            read_table(b"name,note\n\"Smith, J\",\"said \"\"hi\"\"\"\n\"two\nlines\",x\nlast,y\n")
                .unwrap();
        assert_eq!(t.rows[0], vec!["Smith, J", "said \"hi\""]);
        assert_eq!(t.rows[1], vec!["two\nlines", "x"]);
        // The quoted newline makes the record after it start one line later.
        assert_eq!(t.lines, vec![2, 3, 5]);
    }

    #[test]
    fn crlf_line_ends_are_not_part_of_cells() {
        let t = read_table(b"a,b\r\n1,2\r\n3,4\r\n").unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
        assert_eq!(t.rows, vec![vec!["1", "2"], vec!["3", "4"]]);
        assert_eq!(t.lines, vec![2, 3]);
    }

    #[test]
    fn byte_order_mark_and_header_spaces_are_removed() {
        let t = read_table(b"\xEF\xBB\xBFa , b\n1,2\n").unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
    }

    #[test]
    fn blank_lines_are_skipped_but_counted() {
        let t = read_table(b"\na,b\n1,2\n\n\n3,4\n").unwrap();
        assert_eq!(t.rows.len(), 2);
        assert_eq!(t.lines, vec![3, 6]);
        let t = read_table(b"a,b\r\n\r\n1,2\r\n").unwrap();
        assert_eq!(t.lines, vec![3]);
    }

    #[test]
    fn ragged_row_after_crlf_and_quoted_newline_names_its_line() {
        let err = read_table(b"a,b\r\n\"x\r\ny\",1\r\n2\r\n").unwrap_err();
        assert!(
            matches!(err, DataError::RaggedRow { line: 4, .. }),
            "{err:?}"
        );
    }

    #[test]
    fn ragged_row_error_names_its_line() {
        let err = read_table(b"a,b,c\n1,2,3\n4,5\n6,7,8\n").unwrap_err();
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
        assert_eq!(read_table(b"").unwrap_err(), DataError::EmptyFile);
        assert_eq!(read_table(b"\n\n").unwrap_err(), DataError::EmptyFile);
    }

    #[test]
    fn header_only_gives_an_empty_table() {
        let t = read_table(b"a,b\n").unwrap();
        assert_eq!(t.headers, vec!["a", "b"]);
        assert!(t.rows.is_empty());
        assert!(t.lines.is_empty());
    }

    #[test]
    fn invalid_utf8_names_its_line() {
        let err = read_table(b"a,b\n1,2\n3,\xff\xfe\n").unwrap_err();
        assert_eq!(err, DataError::InvalidUtf8 { line: 3 });
    }

    #[test]
    fn empty_and_repeated_column_names_are_errors() {
        assert_eq!(
            read_table(b"a,,c\n1,2,3\n").unwrap_err(),
            DataError::EmptyHeader { column: 2 }
        );
        assert_eq!(
            read_table(b"a,b,a\n1,2,3\n").unwrap_err(),
            DataError::DuplicateHeader {
                name: "a".into(),
                first: 1,
                second: 3
            }
        );
    }

    #[test]
    fn line_falls_back_for_hand_built_tables() {
        let t = Table {
            headers: vec!["a".into()],
            rows: vec![vec!["1".into()], vec!["2".into()]],
            lines: vec![],
        };
        assert_eq!(t.line(1), 3);
    }
}
