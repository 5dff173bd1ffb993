//! The input stream of a batch job, cut into chunks of whole records.
//!
//! The input is read sequentially (a file, a gzip file by its `.gz`
//! extension, or stdin) and handed out as chunks of about a target size
//! that begin and end on record boundaries: a chunk ends after the last
//! newline that is outside quotes. The stream is read once from its start,
//! so the quote state is always known exactly — no guessing at a boundary.
//! Memory is the chunks in flight, whatever the file's size.

use std::io::Read;
use std::path::Path;
use std::sync::Arc;

use crate::error::{Error, Position, Result};
use crate::records::{record_end, whole_records_len, Dialect};

/// A readable input, boxed so that file, gzip and stdin look the same.
pub type Input = Box<dyn Read + Send>;

/// Opens `path` for reading: `-` is stdin; a name ending in `.gz` is
/// decompressed as it is read (members concatenated, as `gzip -c a b`
/// writes them).
pub fn open(path: &Path) -> Result<Input> {
    let shown = shown_path(path);
    if path.as_os_str() == "-" {
        return Ok(Box::new(std::io::stdin()));
    }
    let file = std::fs::File::open(path).map_err(|e| Error::io(&shown, e))?;
    if path.extension().is_some_and(|e| e.eq_ignore_ascii_case("gz")) {
        let buffered = std::io::BufReader::with_capacity(1 << 20, file);
        Ok(Box::new(flate2::read::MultiGzDecoder::new(buffered)))
    } else {
        // Reads are a chunk at a time already: no buffer in between.
        Ok(Box::new(file))
    }
}

/// A reader of `path` in chunks of about `target` bytes: a regular
/// uncompressed file is memory-mapped (the reading thread then only finds
/// record boundaries; the workers touch the bytes), anything else is read
/// as a stream.
pub fn open_chunked(path: &Path, target: usize, dialect: Dialect) -> Result<ChunkReader> {
    let shown = shown_path(path);
    let plain = path.as_os_str() != "-" && !path.extension().is_some_and(|e| e.eq_ignore_ascii_case("gz"));
    if plain {
        let file = std::fs::File::open(path).map_err(|e| Error::io(&shown, e))?;
        if file.metadata().is_ok_and(|m| m.is_file() && m.len() > 0) {
            // SAFETY: the map is only read; the documented condition is that
            // nobody truncates the file while baserate reads it (the same
            // condition as every mmap-based reader).
            if let Ok(map) = unsafe { memmap2::Mmap::map(&file) } {
                let mut reader = ChunkReader::new(Box::new(std::io::empty()), shown, target, dialect);
                reader.mapped = Some((Arc::new(map), 0));
                return Ok(reader);
            }
        }
    }
    Ok(ChunkReader::new(open(path)?, shown, target, dialect))
}

/// How a path is named in messages: `<stdin>` for `-`.
pub fn shown_path(path: &Path) -> String {
    if path.as_os_str() == "-" {
        "<stdin>".to_string()
    } else {
        path.display().to_string()
    }
}

/// Whole records read from the input.
#[derive(Debug)]
pub struct RawChunk {
    /// Position of the chunk in the stream (0, 1, 2, ...).
    pub index: usize,
    /// The records' bytes, line ends included. (Line numbers are settled
    /// when results join in order: counting line ends here would put a pass
    /// over every byte on the one reading thread.)
    pub bytes: ChunkBytes,
    /// The chunk ends the input. In any other chunk, a record that reaches
    /// the chunk's end inside quotes was cut by the size cap.
    pub last: bool,
}

/// A chunk's bytes: read into memory, or a range of a mapped file.
#[derive(Debug)]
pub enum ChunkBytes {
    /// Bytes read from a stream.
    Owned(Vec<u8>),
    /// A range of a memory-mapped regular file.
    Mapped(Arc<memmap2::Mmap>, std::ops::Range<usize>),
}

impl ChunkBytes {
    /// The bytes.
    pub fn as_slice(&self) -> &[u8] {
        match self {
            ChunkBytes::Owned(v) => v,
            ChunkBytes::Mapped(map, range) => &map[range.clone()],
        }
    }

    /// Gives a mapped range's pages back once the chunk is done, so resident
    /// memory stays at the chunks in flight whatever the file's size. Called
    /// in file order; the range reaches `margin` bytes back, because a page
    /// fault maps a window of pages around the faulting one, and a chunk
    /// finishing late can map a few of its predecessor's pages again.
    pub fn release(&self, margin: usize) {
        if let ChunkBytes::Mapped(map, range) = self {
            let start = range.start.saturating_sub(margin);
            // SAFETY: DontNeed on a read-only, file-backed shared map only
            // discards cached pages; read again, they are the file's
            // contents (a neighbouring chunk sharing a page re-reads it).
            let _ = unsafe { map.unchecked_advise_range(memmap2::UncheckedAdvice::DontNeed, start, range.end - start) };
        }
    }
}

/// Reads the input in chunks of whole records.
pub struct ChunkReader {
    input: Input,
    path: String,
    /// Bytes read but not yet handed out; they start on a record boundary.
    pending: Vec<u8>,
    target: usize,
    next_line: u64,
    next_index: usize,
    finished: bool,
    /// Bytes read from the input so far (after decompression).
    pub bytes_read: u64,
    /// A mapped file and the position reached in it.
    mapped: Option<(Arc<memmap2::Mmap>, usize)>,
    dialect: Dialect,
}

impl ChunkReader {
    /// A reader handing out chunks of about `target` bytes.
    pub fn new(input: Input, path: String, target: usize, dialect: Dialect) -> Self {
        ChunkReader {
            input,
            path,
            pending: Vec::new(),
            target: target.max(1),
            next_line: 1,
            next_index: 0,
            finished: false,
            bytes_read: 0,
            mapped: None,
            dialect,
        }
    }

    /// Reads up to `want` more bytes into `pending`; false at the end.
    fn fill(&mut self, want: usize) -> Result<bool> {
        if self.finished {
            return Ok(false);
        }
        let start = self.pending.len();
        // read_to_end on a `take` fills spare capacity without zeroing it.
        let mut limited = (&mut self.input).take(want as u64);
        loop {
            match limited.read_to_end(&mut self.pending) {
                Ok(_) => break,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(Error::io(&self.path, e)),
            }
        }
        let filled = self.pending.len();
        if filled - start < want {
            self.finished = true;
        }
        self.bytes_read += (filled - start) as u64;
        Ok(filled > start)
    }

    /// The header record's bytes (without its line end; a UTF-8 byte-order
    /// mark and empty lines before it dropped). `None` for an empty input.
    pub fn header(&mut self) -> Result<Option<Vec<u8>>> {
        loop {
            let (bytes, complete): (&[u8], bool) = match &self.mapped {
                Some((map, _)) => (map, true),
                None => (&self.pending, self.finished),
            };
            let mut from = if bytes.starts_with(b"\xEF\xBB\xBF") { 3 } else { 0 };
            let mut found = None;
            while let Some(end) = record_end(bytes, from, &self.dialect, complete) {
                if end.end > from {
                    found = Some((from, end));
                    break;
                }
                from = end.next;
            }
            match found {
                Some((start, end)) => {
                    if end.oversized || end.unclosed {
                        let line = self.next_line + crate::records::count_line_ends(&bytes[..start]);
                        let message = if end.oversized {
                            crate::data::csv_read::oversized_message(&self.dialect)
                        } else {
                            crate::records::FieldError::UnclosedQuote.message().to_string()
                        };
                        let at = Position { path: self.path.clone(), line };
                        return Err(Error::Malformed { at, column: "(header)".to_string(), message });
                    }
                    let header = bytes[start..end.end].to_vec();
                    self.next_line += crate::records::count_line_ends(&bytes[..end.next]);
                    match &mut self.mapped {
                        Some((_, position)) => *position = end.next,
                        None => {
                            self.pending.drain(..end.next);
                        }
                    }
                    return Ok(Some(header));
                }
                None if complete => return Ok(None),
                None => {
                    if !self.fill(64 * 1024)? {
                        self.finished = true;
                    }
                }
            }
        }
    }

    /// The next chunk of whole records, or `None` at the end of the input.
    pub fn next_chunk(&mut self) -> Result<Option<RawChunk>> {
        if let Some((map, position)) = &mut self.mapped {
            let start = *position;
            if start >= map.len() {
                return Ok(None);
            }
            let mut end = start.saturating_add(self.target).min(map.len());
            while end < map.len() {
                match whole_records_len(&map[start..end], &self.dialect, false) {
                    Some(length) => {
                        end = start + length;
                        break;
                    }
                    // One record longer than the window: look twice as far.
                    None => end = start.saturating_add(2 * (end - start)).min(map.len()),
                }
            }
            *position = end;
            self.bytes_read += (end - start) as u64;
            let bytes = ChunkBytes::Mapped(Arc::clone(map), start..end);
            let last = end == map.len();
            return Ok(Some(self.hand_out(bytes, last)));
        }
        while self.pending.len() < self.target && !self.finished {
            let want = self.target - self.pending.len();
            self.fill(want)?;
        }
        loop {
            if self.pending.is_empty() {
                return Ok(None);
            }
            if self.finished {
                // What is left is the last records (perhaps without a final newline).
                let bytes = std::mem::take(&mut self.pending);
                return Ok(Some(self.hand_out(ChunkBytes::Owned(bytes), true)));
            }
            if let Some(length) = whole_records_len(&self.pending, &self.dialect, false) {
                let rest = self.pending.split_off(length);
                let bytes = std::mem::replace(&mut self.pending, rest);
                return Ok(Some(self.hand_out(ChunkBytes::Owned(bytes), false)));
            }
            // One record longer than the target: read on until it ends.
            let want = self.pending.len().max(self.target);
            self.fill(want)?;
        }
    }

    fn hand_out(&mut self, bytes: ChunkBytes, last: bool) -> RawChunk {
        let chunk = RawChunk { index: self.next_index, bytes, last };
        self.next_index += 1;
        chunk
    }

    /// The line of the first record after the header.
    pub fn first_data_line(&self) -> u64 {
        self.next_line
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::records::count_line_ends;

    fn chunks_of(text: &str, target: usize) -> (Vec<u8>, Vec<(u64, String)>) {
        let input = Box::new(std::io::Cursor::new(text.as_bytes().to_vec()));
        let mut reader = ChunkReader::new(input, "t".into(), target, Dialect::default());
        let header = reader.header().unwrap_or_default().unwrap_or_default();
        let mut line = reader.first_data_line();
        let mut out = Vec::new();
        while let Ok(Some(c)) = reader.next_chunk() {
            let newlines = count_line_ends(c.bytes.as_slice());
            out.push((line, String::from_utf8(c.bytes.as_slice().to_vec()).unwrap_or_default()));
            line += newlines;
        }
        (header, out)
    }

    #[test]
    fn chunks_are_whole_records_with_their_first_lines() {
        let text = "a,b\r\n1,2\n\"x\ny\",3\r4,5";
        for target in 1..30 {
            let (header, chunks) = chunks_of(text, target);
            assert_eq!(header, b"a,b");
            let joined: String = chunks.iter().map(|(_, c)| c.as_str()).collect();
            assert_eq!(joined, "1,2\n\"x\ny\",3\r4,5");
            let mut line = 2;
            for (first, c) in &chunks {
                assert_eq!(*first, line);
                assert!(c.ends_with('\n') || c.ends_with('\r') || c.ends_with('5'), "target {target}: {c:?}");
                assert_eq!(c.matches('"').count() % 2, 0, "target {target}: {c:?}");
                line += count_line_ends(c.as_bytes());
            }
        }
    }

    /// A quote inside an unquoted field is text, not the start of a quoted
    /// field: it does not join records.
    #[test]
    fn stray_quotes_do_not_join_records() {
        let text = "id,h,x\n1,5'11\",3\n2,6'0\",4\n3,\"a\"\"b\",5\n";
        for target in [1, 3, 8, 100] {
            let (_, chunks) = chunks_of(text, target);
            assert!(chunks.iter().all(|(_, c)| c.ends_with('\n')), "{target}: {chunks:?}");
            let joined: String = chunks.iter().map(|(_, c)| c.as_str()).collect();
            let dialect = Dialect::default();
            let records: Vec<&[u8]> =
                crate::records::records(joined.as_bytes(), &dialect, 1).map(|r| r.bytes).collect();
            let expected: [&[u8]; 3] = [b"1,5'11\",3", b"2,6'0\",4", b"3,\"a\"\"b\",5"];
            assert_eq!(records, expected, "{target}");
        }
    }

    #[test]
    fn bom_and_empty_inputs() {
        assert_eq!(chunks_of("\u{feff}a,b\n1,2\n", 4).0, b"a,b");
        let mut reader =
            ChunkReader::new(Box::new(std::io::Cursor::new(Vec::new())), "t".into(), 4, Dialect::default());
        assert!(matches!(reader.header(), Ok(None)));
    }
}
