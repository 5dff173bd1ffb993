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

use crate::error::{Error, Result};

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
pub fn open_chunked(path: &Path, target: usize, delimiter: u8) -> Result<ChunkReader> {
    let shown = shown_path(path);
    let plain = path.as_os_str() != "-" && !path.extension().is_some_and(|e| e.eq_ignore_ascii_case("gz"));
    if plain {
        let file = std::fs::File::open(path).map_err(|e| Error::io(&shown, e))?;
        if file.metadata().is_ok_and(|m| m.is_file() && m.len() > 0) {
            // SAFETY: the map is only read; the documented condition is that
            // nobody truncates the file while baserate reads it (the same
            // condition as every mmap-based reader).
            if let Ok(map) = unsafe { memmap2::Mmap::map(&file) } {
                let mut reader = ChunkReader::new(Box::new(std::io::empty()), shown, target, delimiter);
                reader.mapped = Some((Arc::new(map), 0));
                return Ok(reader);
            }
        }
    }
    Ok(ChunkReader::new(open(path)?, shown, target, delimiter))
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
    /// The records' bytes, newlines included. (Line numbers are settled
    /// when results join in order: counting newlines here would put a pass
    /// over every byte on the one reading thread.)
    pub bytes: ChunkBytes,
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
    delimiter: u8,
}

impl ChunkReader {
    /// A reader handing out chunks of about `target` bytes.
    pub fn new(input: Input, path: String, target: usize, delimiter: u8) -> Self {
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
            delimiter,
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

    /// The header record's bytes (without its line end), with a UTF-8
    /// byte-order mark removed. `None` for an empty input.
    pub fn header(&mut self) -> Result<Option<Vec<u8>>> {
        if let Some((map, position)) = &mut self.mapped {
            let end = record_end(map, 0, self.delimiter).unwrap_or(map.len());
            let mut header = map[..end].to_vec();
            *position = (end + 1).min(map.len());
            self.next_line += count_newlines(&map[..*position]);
            if header.last() == Some(&b'\r') {
                header.pop();
            }
            let header = strip_bom(header);
            return Ok(if header.is_empty() && end == map.len() { None } else { Some(header) });
        }
        loop {
            if let Some(end) = record_end(&self.pending, 0, self.delimiter) {
                let mut header: Vec<u8> = self.pending.drain(..=end).collect();
                self.next_line += count_newlines(&header);
                header.pop();
                if header.last() == Some(&b'\r') {
                    header.pop();
                }
                return Ok(Some(strip_bom(header)));
            }
            if !self.fill(64 * 1024)? {
                let header = std::mem::take(&mut self.pending);
                return Ok(if header.is_empty() || header == b"\xEF\xBB\xBF" { None } else { Some(strip_bom(header)) });
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
                match last_record_end(&map[start..end], self.delimiter) {
                    Some(at) => {
                        end = start + at + 1;
                        break;
                    }
                    // One record longer than the window: look twice as far.
                    None => end = start.saturating_add(2 * (end - start)).min(map.len()),
                }
            }
            *position = end;
            self.bytes_read += (end - start) as u64;
            let bytes = ChunkBytes::Mapped(Arc::clone(map), start..end);
            return Ok(Some(self.hand_out(bytes)));
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
                return Ok(Some(self.hand_out(ChunkBytes::Owned(bytes))));
            }
            if let Some(end) = last_record_end(&self.pending, self.delimiter) {
                let rest = self.pending.split_off(end + 1);
                let bytes = std::mem::replace(&mut self.pending, rest);
                return Ok(Some(self.hand_out(ChunkBytes::Owned(bytes))));
            }
            // One record longer than the target: read on until it ends.
            let want = self.pending.len().max(self.target);
            self.fill(want)?;
        }
    }

    fn hand_out(&mut self, bytes: ChunkBytes) -> RawChunk {
        let chunk = RawChunk { index: self.next_index, bytes };
        self.next_index += 1;
        chunk
    }

    /// The line of the first record after the header.
    pub fn first_data_line(&self) -> u64 {
        self.next_line
    }
}

fn strip_bom(mut bytes: Vec<u8>) -> Vec<u8> {
    if bytes.starts_with(b"\xEF\xBB\xBF") {
        bytes.drain(..3);
    }
    bytes
}

/// Newlines in `bytes` (quoted ones included: they are lines of the file).
pub fn count_newlines(bytes: &[u8]) -> u64 {
    memchr::memchr_iter(b'\n', bytes).count() as u64
}

/// The longest a quoted field may run on before it is taken to be an
/// unclosed quote: its record then ends at the first newline after its
/// start, and is set aside as malformed, instead of swallowing the rest of
/// the file.
pub const MAX_QUOTED_RECORD: usize = 1 << 20;

/// The position of the newline that ends the record starting at `from`, or
/// `None` when the record does not end within `bytes`.
///
/// The rules are the field splitter's: a `"` opens a quoted field only as
/// a field's first byte; inside one, `""` is a quote and a newline or a
/// delimiter is text; elsewhere a `"` is an ordinary byte. A record still
/// inside quotes more than [`MAX_QUOTED_RECORD`] bytes after its start ends
/// at its first newline.
pub fn record_end(bytes: &[u8], from: usize, delimiter: u8) -> Option<usize> {
    let mut quoted = false;
    let mut field_start = from;
    let mut position = from;
    loop {
        if quoted {
            let Some(offset) = memchr::memchr(b'"', &bytes[position..]) else {
                return unclosed(bytes, from);
            };
            let at = position + offset;
            if at - from > MAX_QUOTED_RECORD {
                return unclosed(bytes, from);
            }
            if bytes.get(at + 1) == Some(&b'"') {
                position = at + 2;
            } else {
                quoted = false;
                position = at + 1;
            }
            continue;
        }
        let offset = memchr::memchr3(b'"', b'\n', delimiter, &bytes[position..])?;
        let at = position + offset;
        match bytes[at] {
            b'\n' => return Some(at),
            b'"' if at == field_start => quoted = true,
            b'"' => {}
            _ => field_start = at + 1,
        }
        position = at + 1;
    }
}

/// Where a record with an unclosed quote ends: at its first newline, once
/// more than [`MAX_QUOTED_RECORD`] bytes show the quote is not closing.
fn unclosed(bytes: &[u8], from: usize) -> Option<usize> {
    if bytes.len() - from <= MAX_QUOTED_RECORD {
        return None;
    }
    memchr::memchr(b'\n', &bytes[from..]).map(|o| from + o)
}

/// The position of the last record end in `bytes`, which start on a record
/// boundary.
fn last_record_end(bytes: &[u8], delimiter: u8) -> Option<usize> {
    if memchr::memchr(b'"', bytes).is_none() {
        return memchr::memrchr(b'\n', bytes);
    }
    let mut last = None;
    let mut from = 0;
    while let Some(end) = record_end(bytes, from, delimiter) {
        last = Some(end);
        from = end + 1;
    }
    last
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chunks_of(text: &str, target: usize) -> (Vec<u8>, Vec<(u64, String)>) {
        let mut reader =
            ChunkReader::new(Box::new(std::io::Cursor::new(text.as_bytes().to_vec())), "t".into(), target, b',');
        let header = reader.header().unwrap_or_default().unwrap_or_default();
        let mut line = reader.first_data_line();
        let mut out = Vec::new();
        while let Ok(Some(c)) = reader.next_chunk() {
            let newlines = count_newlines(c.bytes.as_slice());
            out.push((line, String::from_utf8(c.bytes.as_slice().to_vec()).unwrap_or_default()));
            line += newlines;
        }
        (header, out)
    }

    #[test]
    fn chunks_are_whole_records_with_their_first_lines() {
        let text = "a,b\r\n1,2\n\"x\ny\",3\n4,5";
        for target in 1..30 {
            let (header, chunks) = chunks_of(text, target);
            assert_eq!(header, b"a,b");
            let joined: String = chunks.iter().map(|(_, c)| c.as_str()).collect();
            assert_eq!(joined, "1,2\n\"x\ny\",3\n4,5");
            let mut line = 2;
            for (first, c) in &chunks {
                assert_eq!(*first, line);
                assert!(c.ends_with('\n') || c.ends_with('5'), "target {target}: {c:?}");
                assert_eq!(c.matches('"').count() % 2, 0, "target {target}: {c:?}");
                line += c.matches('\n').count() as u64;
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
            let mut records = Vec::new();
            let mut from = 0;
            while let Some(end) = record_end(joined.as_bytes(), from, b',') {
                records.push(&joined[from..end]);
                from = end + 1;
            }
            assert_eq!(records, ["1,5'11\",3", "2,6'0\",4", "3,\"a\"\"b\",5"], "{target}");
        }
        // An unclosed quote ends its record at its first newline once it has
        // run past the limit.
        let mut long = String::from("\"open,1\n");
        long.push_str(&"2,3\n".repeat(MAX_QUOTED_RECORD / 4 + 10));
        assert_eq!(record_end(long.as_bytes(), 0, b','), Some(7));
        assert_eq!(record_end(&long.as_bytes()[..100], 0, b','), None);
    }

    #[test]
    fn bom_and_empty_inputs() {
        assert_eq!(chunks_of("\u{feff}a,b\n1,2\n", 4).0, b"a,b");
        let mut reader = ChunkReader::new(Box::new(std::io::Cursor::new(Vec::new())), "t".into(), 4, b',');
        assert!(matches!(reader.header(), Ok(None)));
    }
}
