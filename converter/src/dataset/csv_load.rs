//! Loading feature rows from a comma-separated file.

use std::io::{BufRead, Read};
use std::path::{Path, PathBuf};

use super::{CsvOptions, Dataset, DatasetError, LabelColumn};

/// Loads a CSV file of feature rows, with an optional header and an optional label column.
///
/// Fields are trimmed of surrounding spaces; blank lines are skipped. Every row must have as
/// many fields as the first; every feature must be a finite number that fits in f32.
pub fn load_csv(path: &Path, opts: &CsvOptions) -> Result<Dataset, DatasetError> {
    let bytes = std::fs::read(path).map_err(|source| DatasetError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    read_csv(&bytes, path, opts)
}

/// True when `s` is a number as far as header detection goes (empty fields count as neither).
fn is_number(s: &str) -> bool {
    s.parse::<f64>().is_ok()
}

/// Turns record offsets into 1-based line numbers as an editor shows them. The CSV reader's own
/// line count does not count blank lines, so lines are counted here from the text, read a second
/// time from `input` (the same bytes, front to back). Offsets must come in increasing order (they
/// do: records are read front to back).
pub(super) struct LineCounter<L: BufRead> {
    input: L,
    offset: u64,
    line: u64,
}

impl<L: BufRead> LineCounter<L> {
    pub(super) fn new(input: L) -> Self {
        LineCounter {
            input,
            offset: 0,
            line: 1,
        }
    }

    fn line_at(&mut self, byte: u64) -> u64 {
        while self.offset < byte {
            let Ok(buf) = self.input.fill_buf() else {
                break;
            };
            if buf.is_empty() {
                break;
            }
            let take = buf
                .len()
                .min(usize::try_from(byte - self.offset).unwrap_or(usize::MAX));
            let skipped = buf.get(..take).unwrap_or(&[]);
            self.line += skipped.iter().filter(|&&c| c == b'\n').count() as u64;
            self.input.consume(take);
            self.offset += take as u64;
        }
        // The reader's offset is where it began looking for the record, before the blank lines
        // (and the `\n` of a CRLF) it skipped.
        loop {
            let next = match self.input.fill_buf() {
                Ok(buf) => buf.first().copied(),
                Err(_) => None,
            };
            match next {
                Some(c @ (b'\r' | b'\n')) => {
                    self.line += u64::from(c == b'\n');
                    self.input.consume(1);
                    self.offset += 1;
                }
                _ => break,
            }
        }
        self.line
    }
}

/// Where a CSV field is, for messages.
pub(super) struct FieldAt<'a> {
    /// The file.
    pub path: &'a Path,
    /// 1-based line number, as an editor shows it.
    pub line: u64,
    index: usize,
    names: Option<&'a [String]>,
}

impl FieldAt<'_> {
    /// The column: `'name'` with a header, `index N` (0-based) without.
    pub fn column(&self) -> String {
        match self.names.and_then(|n| n.get(self.index)) {
            Some(n) => format!("'{n}'"),
            None => format!("index {}", self.index),
        }
    }
}

/// The feature fields of a CSV file, each turned into a `T`, with the labels.
pub(super) struct CsvRows<T> {
    pub rows: usize,
    pub width: usize,
    pub values: Vec<T>,
    pub labels: Option<Vec<String>>,
}

/// A feature field as a finite f32.
pub(super) fn finite_f32(field: &str, at: &FieldAt<'_>) -> Result<f32, DatasetError> {
    let v: f32 = field.parse().map_err(|_| DatasetError::NonNumeric {
        path: at.path.to_path_buf(),
        line: at.line,
        column: at.column(),
        value: field.to_string(),
    })?;
    if !v.is_finite() {
        return Err(DatasetError::NotFiniteCsv {
            path: at.path.to_path_buf(),
            line: at.line,
            column: at.column(),
            value: field.to_string(),
        });
    }
    Ok(v)
}

/// Reads CSV text from `input`; `path` is used for messages and the dataset's source.
pub(super) fn read_csv(
    input: &[u8],
    path: &Path,
    opts: &CsvOptions,
) -> Result<Dataset, DatasetError> {
    let r = read_csv_with(input, path, opts, finite_f32)?;
    Ok(Dataset {
        rows: r.rows,
        width: r.width,
        features: r.values,
        labels: r.labels,
        source: path.display().to_string(),
    })
}

/// Reads CSV text from `input`, turning each feature field into a `T` with `field` (which names
/// the line and column when it refuses one).
pub(super) fn read_csv_with<T>(
    input: &[u8],
    path: &Path,
    opts: &CsvOptions,
    mut field: impl FnMut(&str, &FieldAt<'_>) -> Result<T, DatasetError>,
) -> Result<CsvRows<T>, DatasetError> {
    let mut r = CsvReader::open(input, input, path, opts)?;
    match r.next_chunk(usize::MAX, &mut field)? {
        Some(rows) => Ok(rows),
        None => Err(DatasetError::NoDataRows {
            path: path.to_path_buf(),
        }),
    }
}

/// A CSV file's rows read a chunk at a time: the first record settles the header, the label
/// column and the width; then records are read as they are asked for. `R` reads the text for the
/// CSV reader, `L` the same text again for the line numbers of messages.
pub(super) struct CsvReader<R: Read, L: BufRead> {
    path: PathBuf,
    records: csv::StringRecordsIntoIter<R>,
    first: Option<csv::StringRecord>,
    columns: usize,
    label_index: Option<usize>,
    names: Option<Vec<String>>,
    lines: LineCounter<L>,
    /// Features per row.
    pub width: usize,
    /// Rows read so far.
    pub rows: usize,
}

impl<R: Read, L: BufRead> CsvReader<R, L> {
    /// Reads the first record of `input`; `lines` reads the same text for line numbers.
    pub(super) fn open(
        input: R,
        lines: L,
        path: &Path,
        opts: &CsvOptions,
    ) -> Result<Self, DatasetError> {
        let csv_err = |source| DatasetError::Csv {
            path: path.to_path_buf(),
            source,
        };
        let reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .trim(csv::Trim::All)
            .from_reader(input);
        let mut records = reader.into_records();
        let mut first = match records.next() {
            None => {
                return Err(DatasetError::Empty {
                    path: path.to_path_buf(),
                })
            }
            Some(r) => r.map_err(csv_err)?,
        };
        // A byte-order mark (as some spreadsheet programs write) is not part of the first field.
        if let Some(f0) = first.get(0) {
            if let Some(stripped) = f0.strip_prefix('\u{feff}') {
                let mut fixed = csv::StringRecord::new();
                fixed.push_field(stripped.trim());
                for f in first.iter().skip(1) {
                    fixed.push_field(f);
                }
                fixed.set_position(first.position().cloned());
                first = fixed;
            }
        }
        let columns = first.len();

        let has_header = match (opts.has_header, &opts.label) {
            (Some(false), Some(LabelColumn::Name(name))) => {
                return Err(DatasetError::LabelNameWithoutHeader {
                    path: path.to_path_buf(),
                    name: name.clone(),
                })
            }
            (Some(h), _) => h,
            (None, Some(LabelColumn::Name(_))) => true,
            (None, label) => {
                let skip = match label {
                    Some(LabelColumn::Index(i)) => Some(*i),
                    _ => None,
                };
                first
                    .iter()
                    .enumerate()
                    .any(|(j, f)| Some(j) != skip && !f.is_empty() && !is_number(f))
            }
        };
        let names: Option<Vec<String>> =
            has_header.then(|| first.iter().map(str::to_string).collect());

        let label_index = match &opts.label {
            None => None,
            Some(LabelColumn::Index(i)) => {
                if *i >= columns {
                    return Err(DatasetError::LabelIndexOutOfRange {
                        path: path.to_path_buf(),
                        index: *i,
                        columns,
                    });
                }
                Some(*i)
            }
            Some(LabelColumn::Name(name)) => {
                let header = names.as_deref().unwrap_or(&[]);
                match header.iter().position(|h| h == name.trim()) {
                    Some(i) => Some(i),
                    None => {
                        let listed: Vec<String> = header.iter().map(|h| format!("{h:?}")).collect();
                        return Err(DatasetError::LabelColumnNotFound {
                            path: path.to_path_buf(),
                            name: name.clone(),
                            available: listed.join(", "),
                        });
                    }
                }
            }
        };
        let width = columns - usize::from(label_index.is_some());
        if width == 0 {
            return Err(DatasetError::NoFeatureColumns {
                path: path.to_path_buf(),
            });
        }
        Ok(CsvReader {
            path: path.to_path_buf(),
            records,
            first: (!has_header).then_some(first),
            columns,
            label_index,
            names,
            lines: LineCounter::new(lines),
            width,
            rows: 0,
        })
    }

    /// The next rows, at most `max_rows` (at least one), their features turned into `T` by
    /// `field`; `None` after the last row.
    pub(super) fn next_chunk<T>(
        &mut self,
        max_rows: usize,
        field: &mut impl FnMut(&str, &FieldAt<'_>) -> Result<T, DatasetError>,
    ) -> Result<Option<CsvRows<T>>, DatasetError> {
        let path = self.path.as_path();
        let mut values = Vec::new();
        let mut labels = self.label_index.map(|_| Vec::new());
        let mut rows = 0usize;
        while rows < max_rows.max(1) {
            let record = match self.first.take() {
                Some(r) => r,
                None => match self.records.next() {
                    None => break,
                    Some(r) => r.map_err(|source| DatasetError::Csv {
                        path: path.to_path_buf(),
                        source,
                    })?,
                },
            };
            let line = record
                .position()
                .map_or(0, |p| self.lines.line_at(p.byte()));
            if record.len() != self.columns {
                return Err(DatasetError::Ragged {
                    path: path.to_path_buf(),
                    line,
                    found: record.len(),
                    expected: self.columns,
                });
            }
            for (j, text) in record.iter().enumerate() {
                if Some(j) == self.label_index {
                    if let Some(l) = labels.as_mut() {
                        l.push(text.to_string());
                    }
                    continue;
                }
                let at = FieldAt {
                    path,
                    line,
                    index: j,
                    names: self.names.as_deref(),
                };
                values.push(field(text, &at)?);
            }
            rows += 1;
        }
        self.rows += rows;
        if rows == 0 {
            return Ok(None);
        }
        Ok(Some(CsvRows {
            rows,
            width: self.width,
            values,
            labels,
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn load(
        text: &str,
        label: Option<LabelColumn>,
        has_header: Option<bool>,
    ) -> Result<Dataset, DatasetError> {
        read_csv(
            text.as_bytes(),
            Path::new("d.csv"),
            &CsvOptions { label, has_header },
        )
    }

    fn name(s: &str) -> Option<LabelColumn> {
        Some(LabelColumn::Name(s.into()))
    }

    #[test]
    fn header_detected_and_label_by_name() {
        let d = load("a,b,kind\n1,2,x\n3.5,-4e1,y\n", name("kind"), None).unwrap();
        assert_eq!((d.rows, d.width), (2, 2));
        assert_eq!(d.features, vec![1.0, 2.0, 3.5, -40.0]);
        assert_eq!(d.labels, Some(vec!["x".to_string(), "y".to_string()]));
        assert_eq!(d.source, "d.csv");
    }

    #[test]
    fn no_header_detected_when_first_row_is_numeric() {
        let d = load("1,2\n3,4\n", None, None).unwrap();
        assert_eq!((d.rows, d.width), (2, 2));
        assert_eq!(d.labels, None);
    }

    #[test]
    fn text_label_in_first_row_is_not_a_header() {
        // Label column given by index: its text does not make the first row a header.
        let d = load(
            "setosa,5.1,3.5\nvirginica,6.0,2.2\n",
            Some(LabelColumn::Index(0)),
            None,
        )
        .unwrap();
        assert_eq!(d.rows, 2);
        assert_eq!(d.features, vec![5.1, 3.5, 6.0, 2.2]);
        assert_eq!(d.labels, Some(vec!["setosa".into(), "virginica".into()]));
    }

    #[test]
    fn forced_header_on_numeric_first_row() {
        let d = load("0,1\n3,4\n", None, Some(true)).unwrap();
        assert_eq!(d.rows, 1);
        assert_eq!(d.features, vec![3.0, 4.0]);
    }

    #[test]
    fn forced_no_header_makes_text_an_error() {
        let e = load("a,b\n1,2\n", None, Some(false))
            .unwrap_err()
            .to_string();
        assert_eq!(e, "d.csv: line 1, column index 0: \"a\" is not a number");
    }

    #[test]
    fn spaces_blank_lines_and_crlf() {
        let d = load("x , y\r\n 1 , 2 \r\n\r\n3,4\r\n", None, None).unwrap();
        assert_eq!(d.features, vec![1.0, 2.0, 3.0, 4.0]);
    }

    #[test]
    fn byte_order_mark_is_ignored() {
        let d = load("\u{feff}f0,label\n1,a\n", name("label"), None).unwrap();
        assert_eq!(d.features, vec![1.0]);
        let d = load("\u{feff}1,2\n", None, None).unwrap();
        assert_eq!(d.features, vec![1.0, 2.0]);
    }

    #[test]
    fn nan_names_line_and_column() {
        let text = "f1,f2,f3\n1,2,3\n4,5,NaN\n";
        let e = load(text, None, None).unwrap_err().to_string();
        assert_eq!(
            e,
            "d.csv: line 3, column 'f3': NaN (features must be finite f32 numbers)"
        );
    }

    #[test]
    fn inf_and_f32_overflow_are_rejected() {
        assert!(matches!(
            load("1,inf\n", None, None),
            Err(DatasetError::NotFiniteCsv { line: 1, .. })
        ));
        let e = load("1,1e39\n", None, None).unwrap_err();
        assert!(
            matches!(e, DatasetError::NotFiniteCsv { ref value, .. } if value == "1e39"),
            "{e}"
        );
    }

    #[test]
    fn non_numeric_field_without_header() {
        let e = load("1,2\n3,x\n", None, Some(false))
            .unwrap_err()
            .to_string();
        assert_eq!(e, "d.csv: line 2, column index 1: \"x\" is not a number");
    }

    #[test]
    fn empty_feature_field_is_non_numeric() {
        let e = load("a,b\n1,\n", None, None).unwrap_err();
        assert!(
            matches!(e, DatasetError::NonNumeric { line: 2, ref column, .. } if column == "'b'"),
            "{e}"
        );
    }

    #[test]
    fn ragged_row_names_its_line() {
        let e = load("a,b,c\n1,2,3\n\n4,5\n", None, None)
            .unwrap_err()
            .to_string();
        assert_eq!(e, "d.csv: line 4: 2 fields, but the first row has 3");
    }

    #[test]
    fn blank_lines_count_for_line_numbers() {
        let e = load("a\r\n\r\n1\r\n\r\n\r\nx\r\n", None, None).unwrap_err();
        assert!(matches!(e, DatasetError::NonNumeric { line: 6, .. }), "{e}");
        let e = load("\n\n1,2\n\n3\n", None, None).unwrap_err().to_string();
        assert_eq!(e, "d.csv: line 5: 1 fields, but the first row has 2");
    }

    #[test]
    fn quoted_multiline_field_keeps_editor_line_numbers() {
        // The quoted label spans lines 2-3, so the bad row starts on line 4.
        let text = "a,lab\n1,\"two\nlines\"\nzz,b\n";
        let e = load(text, name("lab"), None).unwrap_err();
        assert!(matches!(e, DatasetError::NonNumeric { line: 4, .. }), "{e}");
    }

    #[test]
    fn empty_file_and_header_only() {
        assert!(matches!(
            load("", None, None),
            Err(DatasetError::Empty { .. })
        ));
        assert!(matches!(
            load("\n\n", None, None),
            Err(DatasetError::Empty { .. })
        ));
        let e = load("a,b\n", None, None).unwrap_err().to_string();
        assert_eq!(e, "d.csv: the file has a header but no data rows");
    }

    #[test]
    fn label_column_not_found_lists_header() {
        let e = load("a,b\n1,2\n", name("class"), None)
            .unwrap_err()
            .to_string();
        assert_eq!(
            e,
            "d.csv: no column named \"class\" for the labels; the header has \"a\", \"b\""
        );
    }

    #[test]
    fn label_index_out_of_range() {
        let e = load("1,2\n", Some(LabelColumn::Index(2)), None)
            .unwrap_err()
            .to_string();
        assert_eq!(
            e,
            "d.csv: label column index 2 is out of range: rows have 2 columns (indices 0 to 1)"
        );
    }

    #[test]
    fn label_name_without_header_is_rejected() {
        let e = load("1,2\n", name("b"), Some(false)).unwrap_err();
        assert!(
            matches!(e, DatasetError::LabelNameWithoutHeader { .. }),
            "{e}"
        );
    }

    #[test]
    fn only_a_label_column_has_no_features() {
        let e = load("y\n1\n", name("y"), None).unwrap_err();
        assert!(matches!(e, DatasetError::NoFeatureColumns { .. }), "{e}");
    }

    #[test]
    fn label_by_index_in_the_middle() {
        let d = load("f0,y,f1\n1,2,3\n", Some(LabelColumn::Index(1)), None).unwrap();
        assert_eq!(d.features, vec![1.0, 3.0]);
        assert_eq!(d.labels, Some(vec!["2".to_string()]));
    }

    #[test]
    fn invalid_utf8_is_a_csv_error() {
        let bytes: &[u8] = b"a,b\n1,\xff\n";
        let e = read_csv(bytes, Path::new("d.csv"), &CsvOptions::default()).unwrap_err();
        assert!(matches!(e, DatasetError::Csv { .. }), "{e}");
    }

    #[test]
    fn missing_file_is_io() {
        let e = load_csv(Path::new("/nonexistent/k.csv"), &CsvOptions::default()).unwrap_err();
        assert!(matches!(e, DatasetError::Io { .. }), "{e}");
        assert!(e
            .to_string()
            .starts_with("/nonexistent/k.csv: cannot read the file"));
    }
}
