//! The one CSV record layer: where a record ends, how a record splits into
//! fields, and how lines are counted. Every reader uses it — the parallel
//! reader that builds a training matrix and the streaming scoring job — so
//! a file reads the same whatever the reader and whatever the chunk size.
//!
//! The rules are RFC 4180's, read leniently as Python's `csv` module reads
//! them:
//! - a record ends at a line end outside quotes: LF, CRLF or a lone CR;
//! - a `"` opens a quoted field only as a field's first byte; inside it,
//!   `""` is a quote and delimiters and line ends are text; anywhere else a
//!   `"` is an ordinary byte (`5"x` is the three characters it shows);
//! - an empty line holds no record;
//! - a record may run to [`Dialect::max_record_bytes`] bytes. Past that it
//!   is taken to be an unclosed quote: it ends at its first line end and is
//!   marked oversized, so one stray quote cannot swallow the rest of a file
//!   and a streaming reader's memory stays bounded.
//!
//! Fields come back raw (no trimming): what surrounding white space means
//! is the reader's decision.

/// The default record-size cap: 64 MiB, far above any free-text field
/// (notes, addresses, dumps of a few pages) and small enough that a few
/// such records in flight keep `score`'s memory flat.
pub const DEFAULT_MAX_RECORD_BYTES: usize = 64 << 20;

/// How a file's records are delimited.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Dialect {
    /// The field delimiter (`,` by default).
    pub delimiter: u8,
    /// The longest record, in bytes, before it is taken to be an unclosed
    /// quote (see the module doc).
    pub max_record_bytes: usize,
}

impl Default for Dialect {
    fn default() -> Self {
        Dialect { delimiter: b',', max_record_bytes: DEFAULT_MAX_RECORD_BYTES }
    }
}

impl Dialect {
    /// Refuses a delimiter the record rules cannot split by: the quote,
    /// a line end, or a byte outside ASCII.
    pub fn check_delimiter(delimiter: u8) -> crate::error::Result<()> {
        if delimiter.is_ascii() && !matches!(delimiter, b'"' | b'\n' | b'\r') {
            return Ok(());
        }
        Err(crate::error::Error::invalid(crate::error::message![
            crate::error::Setting::Delimiter,
            format!(
                " cannot be {:?}: a quote and a line end have their own meaning in a CSV record",
                delimiter as char
            )
        ]))
    }

    /// A dialect with this delimiter and the default record-size cap.
    pub fn with_delimiter(delimiter: u8) -> Self {
        Dialect { delimiter, ..Dialect::default() }
    }
}

/// Where one record ends.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RecordEnd {
    /// One past the record's last byte (its line end excluded).
    pub end: usize,
    /// Where the next record starts (after the line end, if any).
    pub next: usize,
    /// The record ran past the size cap: it was cut at its first line end.
    pub oversized: bool,
    /// The record reaches the end of the bytes inside a quoted field.
    pub unclosed: bool,
}

/// Finds the end of the record that starts at `from`.
///
/// `complete` says that `bytes` run to the end of the input; otherwise a
/// record that reaches the end of `bytes` (or could, through a CR or a
/// quote in its last byte) is not yet known to end there, and `None` is
/// returned so that the caller reads more. Returns `None` when `from` is at
/// the end.
pub fn record_end(bytes: &[u8], from: usize, dialect: &Dialect, complete: bool) -> Option<RecordEnd> {
    if from >= bytes.len() {
        return None;
    }
    let window_end = from.saturating_add(dialect.max_record_bytes).saturating_add(1).min(bytes.len());
    let window = &bytes[..window_end];
    let mut quoted = false;
    let mut position = from;
    loop {
        let found = memchr::memchr3(b'"', b'\n', b'\r', &window[position..]).map(|o| position + o);
        let Some(at) = found else { break };
        match (window[at], quoted) {
            (b'"', false) => {
                if at == from || window[at - 1] == dialect.delimiter {
                    quoted = true;
                }
                position = at + 1;
            }
            (b'"', true) => match bytes.get(at + 1) {
                Some(b'"') => position = at + 2,
                Some(_) => {
                    quoted = false;
                    position = at + 1;
                }
                None if complete => {
                    quoted = false;
                    position = at + 1;
                }
                None => return None,
            },
            (_, true) => position = at + 1,
            (b'\n', false) => return Some(RecordEnd { end: at, next: at + 1, oversized: false, unclosed: false }),
            (_, false) => {
                // A CR ends the line; a LF right after it belongs to it.
                return match bytes.get(at + 1) {
                    Some(b'\n') => Some(RecordEnd { end: at, next: at + 2, oversized: false, unclosed: false }),
                    Some(_) => Some(RecordEnd { end: at, next: at + 1, oversized: false, unclosed: false }),
                    None if complete => Some(RecordEnd { end: at, next: at + 1, oversized: false, unclosed: false }),
                    None => None,
                };
            }
        }
        if position >= window.len() {
            break;
        }
    }
    if window_end < bytes.len() || (bytes.len() - from > dialect.max_record_bytes) {
        // Past the cap without an end: cut at the first line end.
        return first_line_end(bytes, from, complete).map(|(end, next)| RecordEnd {
            end,
            next,
            oversized: true,
            unclosed: quoted,
        });
    }
    match (complete, quoted) {
        (false, _) => None,
        (true, false) => Some(RecordEnd { end: bytes.len(), next: bytes.len(), oversized: false, unclosed: false }),
        // A quote still open at the end of the input: the record ends at
        // its first line end, so the lines after it are still read.
        (true, true) => first_line_end(bytes, from, true).map(|(end, next)| RecordEnd {
            end,
            next,
            oversized: false,
            unclosed: true,
        }),
    }
}

/// The first line end at or after `from`, quotes ignored: (end, next).
fn first_line_end(bytes: &[u8], from: usize, complete: bool) -> Option<(usize, usize)> {
    match memchr::memchr2(b'\n', b'\r', &bytes[from..]).map(|o| from + o) {
        Some(at) if bytes[at] == b'\n' => Some((at, at + 1)),
        Some(at) => match bytes.get(at + 1) {
            Some(b'\n') => Some((at, at + 2)),
            Some(_) => Some((at, at + 1)),
            None if complete => Some((at, at + 1)),
            None => None,
        },
        None if complete => Some((bytes.len(), bytes.len())),
        None => None,
    }
}

/// Where the last record that ends within `bytes` (which start on a record
/// boundary) is followed by the next: the length of the longest prefix of
/// whole records, or `None` when no record ends within `bytes`.
pub fn whole_records_len(bytes: &[u8], dialect: &Dialect, complete: bool) -> Option<usize> {
    if complete {
        return (!bytes.is_empty()).then_some(bytes.len());
    }
    if memchr::memchr(b'"', bytes).is_none() {
        // No quotes: the last line end is a record end, unless it is a CR
        // in the last byte (a LF may follow it).
        let mut search = bytes;
        while let Some(at) = memchr::memrchr2(b'\n', b'\r', search) {
            if bytes[at] == b'\n' || at + 1 < bytes.len() {
                return Some(at + 1);
            }
            search = &bytes[..at];
        }
        return None;
    }
    let mut last = None;
    let mut from = 0;
    while let Some(end) = record_end(bytes, from, dialect, false) {
        last = Some(end.next);
        from = end.next;
    }
    last
}

/// Cuts `data` (whole records from its start to its end) into ranges of
/// whole records of about `target` bytes each, by the rules above. Each
/// range ends just after a line end, except perhaps the last.
pub fn split_chunks(data: &[u8], target: usize, dialect: &Dialect) -> Vec<std::ops::Range<usize>> {
    let target = target.max(1);
    let mut ranges = Vec::new();
    let mut start = 0;
    let quote_free = memchr::memchr(b'"', data).is_none();
    while start < data.len() {
        let want = start.saturating_add(target);
        if want >= data.len() {
            ranges.push(start..data.len());
            break;
        }
        let end = if quote_free {
            // Every line end is a record end: cut after the first at or past `want`.
            match first_line_end(data, want - 1, true) {
                Some((_, next)) => next,
                None => data.len(),
            }
        } else {
            let mut from = start;
            loop {
                match record_end(data, from, dialect, true) {
                    Some(end) if end.next >= want => break end.next,
                    Some(end) => from = end.next,
                    None => break data.len(),
                }
            }
        };
        ranges.push(start..end);
        start = end;
    }
    ranges
}

/// Line ends in `bytes`: LF, CRLF and lone CR each count once (quoted ones
/// too: they are lines of the file). `bytes` must not split a CRLF.
pub fn count_line_ends(bytes: &[u8]) -> u64 {
    let lf = memchr::memchr_iter(b'\n', bytes).count() as u64;
    if memchr::memchr(b'\r', bytes).is_none() {
        return lf;
    }
    let lone_cr = memchr::memchr_iter(b'\r', bytes).filter(|&at| bytes.get(at + 1) != Some(&b'\n')).count() as u64;
    lf + lone_cr
}

/// Why a record could not be split into fields.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FieldError {
    /// A quoted field is not closed before the record ends.
    UnclosedQuote,
    /// Something other than a delimiter follows a closing quote.
    TextAfterQuote,
}

impl FieldError {
    /// The problem in words, for messages.
    pub fn message(self) -> &'static str {
        match self {
            FieldError::UnclosedQuote => "a quoted field is not closed",
            FieldError::TextAfterQuote => "text follows a quoted field's closing quote",
        }
    }
}

/// The fields of one record, reusing their buffers from record to record.
#[derive(Debug, Default, Clone)]
pub struct Fields {
    /// Unescaped quoted records' bytes.
    scratch: Vec<u8>,
    /// Each field's byte range, in `scratch` when `unescaped`, else in the
    /// record.
    ranges: Vec<(usize, usize)>,
    unescaped: bool,
}

impl Fields {
    /// Empty buffers.
    pub fn new() -> Self {
        Fields::default()
    }

    /// Splits `record` (without its line end) into fields at `delimiter`.
    /// A record without quotes is not copied.
    pub fn split(&mut self, record: &[u8], delimiter: u8) -> Result<(), FieldError> {
        self.ranges.clear();
        self.unescaped = false;
        if memchr::memchr(b'"', record).is_none() {
            let mut start = 0;
            for at in memchr::memchr_iter(delimiter, record) {
                self.ranges.push((start, at));
                start = at + 1;
            }
            self.ranges.push((start, record.len()));
            return Ok(());
        }
        self.unescaped = true;
        self.scratch.clear();
        let n = record.len();
        let mut i = 0;
        loop {
            let start = self.scratch.len();
            if i < n && record[i] == b'"' {
                let mut k = i + 1;
                loop {
                    let Some(offset) = memchr::memchr(b'"', &record[k..]) else {
                        return Err(FieldError::UnclosedQuote);
                    };
                    self.scratch.extend_from_slice(&record[k..k + offset]);
                    k += offset + 1;
                    if record.get(k) == Some(&b'"') {
                        self.scratch.push(b'"');
                        k += 1;
                    } else {
                        break;
                    }
                }
                self.ranges.push((start, self.scratch.len()));
                // Spaces or tabs may stand between the closing quote and
                // the delimiter.
                while k < n && record[k] != delimiter && matches!(record[k], b' ' | b'\t') {
                    k += 1;
                }
                if k == n {
                    return Ok(());
                }
                if record[k] != delimiter {
                    return Err(FieldError::TextAfterQuote);
                }
                i = k + 1;
            } else {
                let end = memchr::memchr(delimiter, &record[i..]).map_or(n, |o| i + o);
                self.scratch.extend_from_slice(&record[i..end]);
                self.ranges.push((start, self.scratch.len()));
                if end == n {
                    return Ok(());
                }
                i = end + 1;
            }
            if i == n {
                // A delimiter at the very end: one more, empty, field.
                self.ranges.push((self.scratch.len(), self.scratch.len()));
                return Ok(());
            }
        }
    }

    /// How many fields the last split found.
    pub fn len(&self) -> usize {
        self.ranges.len()
    }

    /// True when the last split found no field (never after a split).
    pub fn is_empty(&self) -> bool {
        self.ranges.is_empty()
    }

    /// Field `i` of the record last split (`record` must be that record).
    pub fn get<'a>(&'a self, record: &'a [u8], i: usize) -> &'a [u8] {
        let (a, b) = self.ranges[i];
        if self.unescaped {
            &self.scratch[a..b]
        } else {
            &record[a..b]
        }
    }

    /// Every field of the record last split, in order.
    pub fn iter<'a>(&'a self, record: &'a [u8]) -> impl Iterator<Item = &'a [u8]> + 'a {
        (0..self.ranges.len()).map(move |i| self.get(record, i))
    }
}

/// Appends a field to a comma-delimited line, quoted (with its quotes
/// doubled) when it holds a comma, a quote or a line end: the writing side
/// of the rules above.
pub fn push_field(out: &mut Vec<u8>, field: &[u8]) {
    if field.iter().any(|&b| matches!(b, b',' | b'"' | b'\n' | b'\r')) {
        out.push(b'"');
        for &b in field {
            if b == b'"' {
                out.push(b'"');
            }
            out.push(b);
        }
        out.push(b'"');
    } else {
        out.extend_from_slice(field);
    }
}

/// One record of a whole input held in memory.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Record<'a> {
    /// The record's bytes, without its line end.
    pub bytes: &'a [u8],
    /// The line it starts on (1-based, counted from the start of the bytes
    /// given to [`records`] as `first_line`).
    pub line: u64,
    /// It ran past the size cap (see [`RecordEnd::oversized`]).
    pub oversized: bool,
    /// It ends inside a quoted field.
    pub unclosed: bool,
}

/// The records of whole-record bytes in order (empty lines skipped), each
/// with the line it starts on; after the last, [`Records::line`] is the
/// line after the bytes. Bytes without a quote or a CR take a fast path
/// (every LF ends a record) with the same result.
#[derive(Debug, Clone)]
pub struct Records<'a> {
    bytes: &'a [u8],
    dialect: &'a Dialect,
    from: usize,
    line: u64,
    plain: bool,
}

impl<'a> Records<'a> {
    /// The line the next record (or the end) is on.
    pub fn line(&self) -> u64 {
        self.line
    }
}

impl<'a> Iterator for Records<'a> {
    type Item = Record<'a>;

    fn next(&mut self) -> Option<Record<'a>> {
        loop {
            let bytes = self.bytes;
            let from = self.from;
            if from >= bytes.len() {
                return None;
            }
            let record = if self.plain {
                let (end, next) = match memchr::memchr(b'\n', &bytes[from..]) {
                    Some(offset) => (from + offset, from + offset + 1),
                    None => (bytes.len(), bytes.len()),
                };
                let oversized = end - from > self.dialect.max_record_bytes;
                let record = Record { bytes: &bytes[from..end], line: self.line, oversized, unclosed: false };
                self.line += u64::from(next > end);
                self.from = next;
                record
            } else {
                let end = record_end(bytes, from, self.dialect, true)?;
                let record = Record {
                    bytes: &bytes[from..end.end],
                    line: self.line,
                    oversized: end.oversized,
                    unclosed: end.unclosed,
                };
                self.line += count_line_ends(&bytes[from..end.next]);
                self.from = end.next;
                record
            };
            if !record.bytes.is_empty() {
                return Some(record);
            }
        }
    }
}

/// The records of `bytes` (whole records; empty lines skipped), with the
/// line each starts on, the first being `first_line`.
pub fn records<'a>(bytes: &'a [u8], dialect: &'a Dialect, first_line: u64) -> Records<'a> {
    let plain = memchr::memchr2(b'"', b'\r', bytes).is_none();
    Records { bytes, dialect, from: 0, line: first_line, plain }
}

/// Every record of a whole in-memory input as fields (a UTF-8 byte-order
/// mark dropped, empty lines skipped), read in chunks of `chunk_bytes`:
/// the view every reader of the crate shares, for tests and tools that
/// want the records themselves. Fields are raw (untrimmed) and decoded as
/// UTF-8 with replacement.
pub fn read_all(bytes: &[u8], dialect: &Dialect, chunk_bytes: usize) -> Result<Vec<Vec<String>>, (u64, FieldError)> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let mut out = Vec::new();
    let mut fields = Fields::new();
    let mut line = 1;
    for range in split_chunks(bytes, chunk_bytes, dialect) {
        let chunk = &bytes[range];
        for record in records(chunk, dialect, line) {
            if record.unclosed {
                return Err((record.line, FieldError::UnclosedQuote));
            }
            fields.split(record.bytes, dialect.delimiter).map_err(|e| (record.line, e))?;
            out.push(fields.iter(record.bytes).map(|f| String::from_utf8_lossy(f).into_owned()).collect());
        }
        line += count_line_ends(chunk);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn all(text: &str, chunk: usize) -> Vec<Vec<String>> {
        read_all(text.as_bytes(), &Dialect::default(), chunk).unwrap_or_default()
    }

    fn row(fields: &[&str]) -> Vec<String> {
        fields.iter().map(|f| f.to_string()).collect()
    }

    #[test]
    fn line_ends_of_every_kind_end_records() {
        let text = "a,b\r\n1,2\r3,4\n5,6";
        for chunk in 1..20 {
            assert_eq!(all(text, chunk), vec![row(&["a", "b"]), row(&["1", "2"]), row(&["3", "4"]), row(&["5", "6"])]);
        }
        assert_eq!(count_line_ends(b"a\r\nb\rc\n"), 3);
    }

    #[test]
    fn quotes_open_only_at_a_field_start() {
        let text = "h,x\n5\"11,\"a\nb\"\n\"q\"\"r\",2\n";
        for chunk in 1..30 {
            assert_eq!(all(text, chunk), vec![row(&["h", "x"]), row(&["5\"11", "a\nb"]), row(&["q\"r", "2"])]);
        }
    }

    #[test]
    fn empty_lines_hold_no_record_and_lines_are_counted() {
        let dialect = Dialect::default();
        let text = b"1\n\n\"a\r\nb\"\r\r\n2";
        let found: Vec<(u64, &[u8])> = records(text, &dialect, 1).map(|r| (r.line, r.bytes)).collect();
        assert_eq!(found, vec![(1, &b"1"[..]), (3, &b"\"a\r\nb\""[..]), (6, &b"2"[..])]);
    }

    #[test]
    fn an_unfinished_input_waits_for_more() {
        let dialect = Dialect::default();
        assert_eq!(record_end(b"1,2\r", 0, &dialect, false), None);
        assert_eq!(record_end(b"\"a\"", 0, &dialect, false), None);
        assert_eq!(record_end(b"1,2", 0, &dialect, false), None);
        assert_eq!(whole_records_len(b"1\n2\r", &dialect, false), Some(2));
        assert_eq!(whole_records_len(b"1\n\"2\n", &dialect, false), Some(2));
        assert_eq!(record_end(b"1,2\r", 0, &dialect, true).map(|e| (e.end, e.next)), Some((3, 4)));
    }

    #[test]
    fn a_record_past_the_cap_is_cut_at_its_first_line_end() {
        let dialect = Dialect { delimiter: b',', max_record_bytes: 16 };
        let mut text = b"\"open,1\n".to_vec();
        text.extend_from_slice(&b"2,3\n".repeat(10));
        let end = record_end(&text, 0, &dialect, true);
        assert_eq!(end, Some(RecordEnd { end: 7, next: 8, oversized: true, unclosed: true }));
        // Within the cap the same record waits for its closing quote.
        assert_eq!(record_end(&text[..12], 0, &dialect, false), None);
    }

    #[test]
    fn fields_split_plain_and_quoted() {
        let mut fields = Fields::new();
        let mut split = |record: &str| -> Result<Vec<String>, FieldError> {
            fields.split(record.as_bytes(), b',')?;
            Ok(fields.iter(record.as_bytes()).map(|f| String::from_utf8_lossy(f).into_owned()).collect())
        };
        assert_eq!(split("a,b,,c"), Ok(row(&["a", "b", "", "c"])));
        assert_eq!(split("a,"), Ok(row(&["a", ""])));
        assert_eq!(split("\"x,y\",\"say \"\"hi\"\"\",3"), Ok(row(&["x,y", "say \"hi\"", "3"])));
        assert_eq!(split("\"a\nb\",\"\""), Ok(row(&["a\nb", ""])));
        assert_eq!(split("1,\"x\","), Ok(row(&["1", "x", ""])));
        assert_eq!(split("5\"x,\"y\""), Ok(row(&["5\"x", "y"])));
        assert_eq!(split("\"open,1"), Err(FieldError::UnclosedQuote));
        assert_eq!(split("\"a\"b,1"), Err(FieldError::TextAfterQuote));
        fields.split(b"\"a\"\t\"b\"", b'\t').expect("tab-delimited");
        assert_eq!(fields.len(), 2);
    }

    #[test]
    fn fields_are_quoted_only_when_they_must_be() {
        let mut out = Vec::new();
        push_field(&mut out, b"plain");
        out.push(b'|');
        push_field(&mut out, b"a,\"b\"");
        assert_eq!(out, b"plain|\"a,\"\"b\"\"\"");
    }
}
