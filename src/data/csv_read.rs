//! Reading a delimited text file into typed columns, in parallel.
//!
//! The file is memory-mapped (or read, when it is not a regular file),
//! split into chunks at record boundaries (a newline outside quotes, found
//! by a quote-parity scan), and the chunks are parsed in parallel
//! ([`crate::data::csv_chunk`]). Each chunk knows the line it starts on, so
//! errors name the true line of the file, and the number of lines it holds,
//! so its numeric values go straight to their rows of the final
//! column-major matrix.
//!
//! Kinds are settled per column: a feature column is numeric when every
//! non-missing value parses as a finite `f64`, otherwise categorical. The
//! first chunk is read once on its own to settle the kinds it shows; then
//! every chunk is parsed in parallel, and in the rare case that a later
//! chunk finds text in a column so far numeric, every chunk is parsed once
//! more under the settled kinds. At most two full passes, usually one.
//!
//! Errors are reported for the first offending line of the file, whatever
//! the chunking: each chunk stops at its own first fatal problem, and the
//! earliest one over all chunks wins.

use std::collections::HashMap;
use std::ops::Range;

use ndarray::{Array2, ShapeBuilder};
use rayon::prelude::*;

use crate::data::csv_chunk::{parse_chunk, slots, ChunkOut, NaMatcher, Parse, ParseContext, Release};
pub use crate::data::csv_chunk::{ColumnFacts, MISSING_CODE};
use crate::data::options::ReadOptions;
use crate::data::schema::ColumnRole;
use crate::error::{Error, Part, Position, Result, Setting};

/// Target bytes per chunk: large enough that per-chunk overhead vanishes,
/// small enough that two cores stay balanced on a 200 MB file.
const CHUNK_BYTES: usize = 4 << 20;

/// What was read from one column.
#[derive(Debug, Clone)]
pub enum ColumnValues {
    /// A numeric feature: column `index` of [`ReadTable::numeric`].
    NumericFeature {
        /// Column of the numeric matrix.
        index: usize,
    },
    /// The weight column's values.
    Weights(Vec<f64>),
    /// Codes into `levels` (sorted), [`MISSING_CODE`] where missing.
    Categorical {
        /// Per-row level codes.
        codes: Vec<u32>,
        /// The distinct values, in byte order.
        levels: Vec<String>,
        /// The line each level first appears on.
        first_lines: Vec<u64>,
    },
    /// Raw text (identifier columns).
    Text(Vec<String>),
    /// Not read.
    Skipped,
}

/// One column as read.
#[derive(Debug, Clone)]
pub struct ReadColumn {
    /// Header name.
    pub name: String,
    /// Its role.
    pub role: ColumnRole,
    /// Its values.
    pub values: ColumnValues,
    /// Facts for errors and warnings.
    pub facts: ColumnFacts,
    /// True when the user forced the kind (`--numeric` / `--categorical`).
    pub kind_forced: bool,
}

/// A whole file as read: every header column, typed.
#[derive(Debug, Clone)]
pub struct ReadTable {
    /// The path as the user gave it.
    pub path: String,
    /// Number of data rows.
    pub rows: usize,
    /// Columns in header order.
    pub columns: Vec<ReadColumn>,
    /// The numeric features, column-major (each column contiguous), `NaN`
    /// where missing.
    pub numeric: Array2<f64>,
}

impl ReadTable {
    /// Index of the column with this name.
    pub fn index_of(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c.name == name)
    }
}

/// Reads a file from disk (see [`read_bytes`]).
///
/// A regular file is memory-mapped rather than copied into memory: the
/// parser only reads it, and mapping saves a copy of the whole file (a
/// quarter of the reading time at a million rows). The file must not be
/// truncated while it is read; anything else falls back to a plain read.
pub fn read_path(path: &std::path::Path, options: &ReadOptions) -> Result<ReadTable> {
    read_path_hashing(path, options, false).map(|(table, _)| table)
}

/// [`read_path`], with the SHA-256 of exactly the bytes parsed, from the
/// one open: a pipe or `<(…)` is read once and hashed as read.
pub fn read_path_with_hash(path: &std::path::Path, options: &ReadOptions) -> Result<(ReadTable, String)> {
    let (table, hash) = read_path_hashing(path, options, true)?;
    Ok((table, hash.unwrap_or_default()))
}

fn read_path_hashing(path: &std::path::Path, options: &ReadOptions, hash: bool) -> Result<(ReadTable, Option<String>)> {
    let shown = path.display().to_string();
    let file = std::fs::File::open(path).map_err(|e| Error::io(&shown, e))?;
    let is_regular = file.metadata().map(|m| m.is_file() && m.len() > 0).unwrap_or(false);
    if is_regular {
        // SAFETY: the map is only read, and lives only as long as this call;
        // the documented condition is that nobody truncates the file while
        // baserate reads it (the same condition every mmap-based reader has).
        if let Ok(map) = unsafe { memmap2::Mmap::map(&file) } {
            let base = map.as_ptr() as usize;
            // Parsed chunks' pages are dropped from memory: the map is
            // read-only and file-backed, so a page read again later (a
            // second pass) is simply read from the file again.
            let release = |chunk: &[u8]| {
                let offset = chunk.as_ptr() as usize - base;
                // SAFETY: DontNeed on a read-only, file-backed shared map
                // only discards cached pages; their contents stay those of
                // the file.
                let _ = unsafe { map.unchecked_advise_range(memmap2::UncheckedAdvice::DontNeed, offset, chunk.len()) };
            };
            let digest = hash.then(|| crate::io::sha256_hex(&map));
            return Ok((read_bytes_chunked(&shown, &map, options, CHUNK_BYTES, Some(&release))?, digest));
        }
    }
    let mut bytes = Vec::new();
    std::io::Read::read_to_end(&mut &file, &mut bytes).map_err(|e| Error::io(&shown, e))?;
    let digest = hash.then(|| crate::io::sha256_hex(&bytes));
    Ok((read_bytes(&shown, &bytes, options)?, digest))
}

/// Parses a whole delimited file held in memory. `path` is only used in
/// messages.
pub fn read_bytes(path: &str, bytes: &[u8], options: &ReadOptions) -> Result<ReadTable> {
    read_bytes_chunked(path, bytes, options, CHUNK_BYTES, None)
}

/// [`read_bytes`] with a stated chunk size (tests use tiny chunks to show
/// that chunking changes nothing).
pub(crate) fn read_bytes_chunked(
    path: &str,
    bytes: &[u8],
    options: &ReadOptions,
    chunk_bytes: usize,
    release: Option<Release<'_>>,
) -> Result<ReadTable> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    if bytes.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(Error::EmptyFile { path: path.to_string() });
    }
    let (names, data_start, data_first_line) = read_header(path, bytes, &options.dialect())?;
    let roles = settle_roles(path, &names, options)?;
    let mut plan: Vec<Parse> = names
        .iter()
        .zip(&roles)
        .map(|(_, (role, forced))| match role {
            ColumnRole::Excluded => Parse::Skip,
            ColumnRole::Target => Parse::Target,
            ColumnRole::Id => Parse::Text,
            ColumnRole::Weight => Parse::Weight,
            ColumnRole::Feature => match forced {
                Some(ForcedKind::Categorical) => Parse::Categorical,
                Some(ForcedKind::Numeric(by)) => Parse::Numeric {
                    forced: Some(*by),
                    probability: *by == Setting::ScoreColumns && options.scores_are_probabilities,
                },
                None => Parse::Numeric { forced: None, probability: false },
            },
        })
        .collect();

    let data = &bytes[data_start..];
    let dialect = options.dialect();
    let chunks = crate::records::split_chunks(data, chunk_bytes, &dialect);
    let (first_lines, capacities) = chunk_lines(data, &chunks, data_first_line);
    let context = ParseContext { path, names: &names, dialect, na: NaMatcher::new(&options.na_tokens), release };

    // The first chunk settles the kinds it shows, so that a file whose text
    // columns are not declared still needs only one parallel pass.
    if let (Some(range), Some(&capacity)) = (chunks.first(), capacities.first()) {
        let (_, width, _, _) = slots(&plan);
        let mut scratch = vec![0.0; capacity * width];
        let first =
            parse_chunk(&context, &data[range.clone()], first_lines[0], &plan, column_slices(&mut scratch, capacity));
        plan = first.plan;
    }
    let (mut outs, mut matrix) =
        parse_all(&context, data, &chunks, &first_lines, &capacities, &plan, &options.progress);
    let settled = settle(&plan, &outs);
    if settled != plan && !outs.iter().any(|o| o.fatal.is_some()) {
        plan = settled;
        (outs, matrix) = parse_all(&context, data, &chunks, &first_lines, &capacities, &plan, &options.progress);
    }

    // The first fatal problem in file order: a chunk's own fatal error, or
    // an inf/nan literal in a column that turned out numeric.
    let mut problems: Vec<(u64, Error)> = outs.iter_mut().filter_map(|o| o.fatal.take()).collect();
    let final_plan = settle(&plan, &outs);
    for (column, kind) in final_plan.iter().enumerate() {
        if let Parse::Numeric { .. } = kind {
            if let Some((line, value)) = outs.iter().find_map(|o| o.facts[column].first_non_finite.clone()) {
                problems
                    .push((line, Error::NonFiniteValue { at: context.at(line), column: names[column].clone(), value }));
            }
        }
    }
    if let Some((_, error)) = problems.into_iter().min_by_key(|(line, _)| *line) {
        return Err(error);
    }

    let rows: usize = outs.iter().map(|o| o.rows).sum();
    if rows == 0 {
        return Err(Error::HeaderOnly { path: path.to_string() });
    }
    let numeric = compact(&mut matrix, &capacities, &outs, rows);
    let columns = assemble(&names, &roles, &plan, outs);
    Ok(ReadTable { path: path.to_string(), rows, columns, numeric })
}

/// The plan after a pass: columns any chunk found to hold text are
/// categorical.
fn settle(plan: &[Parse], outs: &[ChunkOut]) -> Vec<Parse> {
    let mut settled = plan.to_vec();
    for out in outs {
        for (column, kind) in out.plan.iter().enumerate() {
            if *kind == Parse::Categorical {
                settled[column] = Parse::Categorical;
            }
        }
    }
    settled
}

/// Splits a column-major buffer of `capacity` rows into its columns.
fn column_slices(buffer: &mut [f64], capacity: usize) -> Vec<&mut [f64]> {
    if capacity == 0 {
        return Vec::new();
    }
    buffer.chunks_mut(capacity).collect()
}

/// Parses every chunk in parallel under `plan`, each writing its numeric
/// values into its own rows of one column-major matrix whose columns hold
/// `Σ capacities` rows.
fn parse_all(
    context: &ParseContext<'_>,
    data: &[u8],
    chunks: &[Range<usize>],
    first_lines: &[u64],
    capacities: &[usize],
    plan: &[Parse],
    progress: &crate::progress::Progress,
) -> (Vec<ChunkOut>, Vec<f64>) {
    let (_, width, _, _) = slots(plan);
    let total: usize = capacities.iter().sum();
    let mut matrix = vec![0.0; total * width];
    // slices[chunk][column]: the chunk's rows of each column.
    let mut slices: Vec<Vec<&mut [f64]>> = (0..chunks.len()).map(|_| Vec::with_capacity(width)).collect();
    for column in column_slices(&mut matrix, total) {
        let mut rest = column;
        for (chunk, &capacity) in capacities.iter().enumerate() {
            let (head, tail) = std::mem::take(&mut rest).split_at_mut(capacity);
            slices[chunk].push(head);
            rest = tail;
        }
    }
    let parsed = progress.counter("reading the file (chunks)", Some(chunks.len() as u64));
    let outs = chunks
        .par_iter()
        .zip(first_lines.par_iter())
        .zip(slices.into_par_iter())
        .map(|((range, &first_line), numeric)| {
            let bytes = &data[range.clone()];
            let out = parse_chunk(context, bytes, first_line, plan, numeric);
            if let Some(release) = context.release {
                release(bytes);
            }
            parsed.step();
            out
        })
        .collect();
    (outs, matrix)
}

/// Closes the gaps chunks left (fewer records than lines: quoted newlines,
/// empty lines) and returns the matrix of `rows` rows.
fn compact(matrix: &mut Vec<f64>, capacities: &[usize], outs: &[ChunkOut], rows: usize) -> Array2<f64> {
    let total: usize = capacities.iter().sum();
    let width = matrix.len().checked_div(total).unwrap_or(0);
    if rows != total {
        let mut destination = 0;
        for column in 0..width {
            let mut source = column * total;
            for (capacity, out) in capacities.iter().zip(outs) {
                matrix.copy_within(source..source + out.rows, destination);
                destination += out.rows;
                source += capacity;
            }
        }
        matrix.truncate(rows * width);
    }
    Array2::from_shape_vec((rows, width).f(), std::mem::take(matrix)).unwrap_or_else(|_| Array2::zeros((rows, 0)))
}

/// Reads the header record (the first record of the file, by the rules of
/// [`crate::records`]); returns the names, the byte offset where data
/// starts and the line number of the first data line.
pub(crate) fn read_header(
    path: &str,
    bytes: &[u8],
    dialect: &crate::records::Dialect,
) -> Result<(Vec<String>, usize, u64)> {
    let mut from = 0;
    let mut line = 1;
    loop {
        let Some(end) = crate::records::record_end(bytes, from, dialect, true) else {
            return Err(Error::EmptyFile { path: path.to_string() });
        };
        let record = &bytes[from..end.end];
        let next_line = line + crate::records::count_line_ends(&bytes[from..end.next]);
        if record.is_empty() {
            from = end.next;
            line = next_line;
            continue;
        }
        let at = Position { path: path.to_string(), line };
        if end.oversized || end.unclosed {
            let message =
                if end.oversized { oversized_message(dialect) } else { "a quoted field is not closed".into() };
            return Err(Error::Malformed { at, column: "(header)".to_string(), message });
        }
        let names = header_names(path, record, dialect.delimiter, line)?;
        return Ok((names, end.next, next_line));
    }
}

/// What a record over the size cap is told.
pub(crate) fn oversized_message(dialect: &crate::records::Dialect) -> String {
    format!(
        "the record runs past {} bytes without ending (an unclosed quote?); the record-size cap is a setting",
        dialect.max_record_bytes
    )
}

/// The column names of a header record (without its line end): split,
/// trimmed, and checked for emptiness and duplicates. `line` is the
/// header's line, for messages.
pub(crate) fn header_names(path: &str, record: &[u8], delimiter: u8, line: u64) -> Result<Vec<String>> {
    let header_at = Position { path: path.to_string(), line };
    let mut fields = crate::records::Fields::new();
    fields.split(record, delimiter).map_err(|e| Error::Malformed {
        at: header_at.clone(),
        column: "(header)".to_string(),
        message: e.message().to_string(),
    })?;
    let mut names = Vec::with_capacity(fields.len());
    let mut seen: HashMap<String, usize> = HashMap::new();
    for (i, field) in fields.iter(record).enumerate() {
        let name = std::str::from_utf8(field)
            .map_err(|_| Error::Malformed {
                at: header_at.clone(),
                column: format!("#{}", i + 1),
                message: "the header is not valid UTF-8".to_string(),
            })?
            .trim()
            .to_string();
        if name.is_empty() {
            return Err(Error::EmptyColumnName { at: header_at, position: i + 1 });
        }
        if let Some(&first) = seen.get(&name) {
            return Err(Error::DuplicateColumn { at: header_at, column: name, first: first + 1, second: i + 1 });
        }
        seen.insert(name.clone(), i);
        names.push(name);
    }
    Ok(names)
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum ForcedKind {
    /// Numeric, by this setting.
    Numeric(Setting),
    Categorical,
}

/// Turns the role and kind options into one (role, forced kind) per column,
/// checking every named column exists and has one role and one kind.
fn settle_roles(path: &str, names: &[String], options: &ReadOptions) -> Result<Vec<(ColumnRole, Option<ForcedKind>)>> {
    let mut roles: Vec<Option<(ColumnRole, Setting)>> = vec![None; names.len()];
    let mut kinds: Vec<Option<(ForcedKind, Setting)>> = vec![None; names.len()];
    let find = |named_by: Part, column: &str| -> Result<usize> {
        names.iter().position(|n| n == column).ok_or_else(|| Error::UnknownColumn {
            path: path.to_string(),
            named_by,
            column: column.to_string(),
            suggestion: crate::data::suggest::closest(column, names),
        })
    };
    let mut assign_role = |flag: Setting, column: &str, role: ColumnRole| -> Result<()> {
        let i = find(flag.into(), column)?;
        match roles[i] {
            Some((_, first)) if first != flag || role != ColumnRole::Excluded => {
                Err(Error::ConflictingRoles { column: column.to_string(), first, second: flag })
            }
            _ => {
                roles[i] = Some((role, flag));
                Ok(())
            }
        }
    };
    if !options.target.is_empty() {
        assign_role(Setting::Target, &options.target, ColumnRole::Target)?;
    }
    if let Some(model_columns) = &options.model_columns {
        for column in model_columns {
            find("the model".into(), column)?;
        }
    }
    for id in &options.ids {
        assign_role(Setting::Ids, id, ColumnRole::Id)?;
    }
    if let Some(weight) = &options.weight {
        assign_role(Setting::Weight, weight, ColumnRole::Weight)?;
    }
    for excluded in &options.exclude {
        assign_role(Setting::Exclude, excluded, ColumnRole::Excluded)?;
    }
    let mut assign_kind = |flag: Setting, column: &str, kind: ForcedKind| -> Result<()> {
        let i = find(flag.into(), column)?;
        if let Some((_, first)) = kinds[i] {
            if first != flag {
                return Err(Error::ConflictingRoles { column: column.to_string(), first, second: flag });
            }
        }
        if let Some((role, first)) = roles[i] {
            if role != ColumnRole::Feature && role != ColumnRole::Excluded {
                return Err(Error::ConflictingRoles { column: column.to_string(), first, second: flag });
            }
        }
        kinds[i] = Some((kind, flag));
        Ok(())
    };
    for column in &options.categorical {
        assign_kind(Setting::Categorical, column, ForcedKind::Categorical)?;
    }
    for column in &options.numeric {
        assign_kind(Setting::Numeric, column, ForcedKind::Numeric(Setting::Numeric))?;
    }
    for column in options.score_columns.iter().filter(|c| !options.numeric.contains(c)) {
        assign_kind(Setting::ScoreColumns, column, ForcedKind::Numeric(Setting::ScoreColumns))?;
    }
    // Scoring against a model: columns the model does not use are ignored.
    let unused = |i: usize| options.model_columns.as_ref().is_some_and(|m| !m.contains(&names[i]));
    Ok(roles
        .into_iter()
        .zip(kinds)
        .enumerate()
        .map(|(i, (role, kind))| match role {
            Some((r, _)) => (r, kind.map(|(k, _)| k)),
            None if unused(i) => (ColumnRole::Excluded, None),
            None => (ColumnRole::Feature, kind.map(|(k, _)| k)),
        })
        .collect())
}

/// The line number each chunk starts on, and the most records it can hold
/// (its newlines, plus one when it does not end with a newline).
fn chunk_lines(data: &[u8], chunks: &[Range<usize>], data_first_line: u64) -> (Vec<u64>, Vec<usize>) {
    let counts: Vec<usize> =
        chunks.par_iter().map(|r| crate::records::count_line_ends(&data[r.clone()]) as usize).collect();
    let mut lines = Vec::with_capacity(chunks.len());
    let mut line = data_first_line;
    for &count in &counts {
        lines.push(line);
        line += count as u64;
    }
    let capacities = counts
        .iter()
        .zip(chunks)
        .map(|(&count, r)| count + usize::from(!matches!(data[r.end - 1], b'\n' | b'\r')))
        .collect();
    (lines, capacities)
}

/// Joins the chunks' categorical, text and weight columns, mapping local
/// category codes to one sorted level list per column.
fn assemble(
    names: &[String],
    roles: &[(ColumnRole, Option<ForcedKind>)],
    plan: &[Parse],
    mut outs: Vec<ChunkOut>,
) -> Vec<ReadColumn> {
    let (slot_of, _, _, _) = slots(plan);
    let rows: usize = outs.iter().map(|o| o.rows).sum();
    let mut columns = Vec::with_capacity(names.len());
    for (column, name) in names.iter().enumerate() {
        let mut facts = ColumnFacts::default();
        for out in &outs {
            facts.merge(&out.facts[column]);
        }
        let slot = slot_of[column];
        let values = match plan[column] {
            Parse::Skip => ColumnValues::Skipped,
            Parse::Numeric { .. } => ColumnValues::NumericFeature { index: slot },
            Parse::Weight => ColumnValues::Weights(outs.iter().flat_map(|o| o.weights.iter().copied()).collect()),
            Parse::Categorical | Parse::Target => {
                let mut all: Vec<&str> =
                    outs.iter().flat_map(|o| o.categorical[slot].levels.iter().map(String::as_str)).collect();
                all.sort_unstable();
                all.dedup();
                let levels: Vec<String> = all.iter().map(|s| s.to_string()).collect();
                let mut codes = Vec::with_capacity(rows);
                let mut first_lines = vec![u64::MAX; levels.len()];
                for out in &outs {
                    let local = &out.categorical[slot];
                    let map: Vec<u32> = local
                        .levels
                        .iter()
                        .map(|l| levels.binary_search(l).map_or(MISSING_CODE, |i| i as u32))
                        .collect();
                    for (&global, &line) in map.iter().zip(&local.first_lines) {
                        if let Some(first) = first_lines.get_mut(global as usize) {
                            *first = (*first).min(line);
                        }
                    }
                    codes.extend(local.codes.iter().map(|&c| if c == MISSING_CODE { c } else { map[c as usize] }));
                }
                ColumnValues::Categorical { codes, levels, first_lines }
            }
            Parse::Text => {
                let mut all = Vec::with_capacity(rows);
                for out in outs.iter_mut() {
                    all.append(&mut out.text[slot]);
                }
                ColumnValues::Text(all)
            }
        };
        columns.push(ReadColumn {
            name: name.clone(),
            role: roles[column].0,
            values,
            facts,
            kind_forced: roles[column].1.is_some(),
        });
    }
    columns
}

#[cfg(test)]
mod tests {
    use super::*;

    fn options() -> ReadOptions {
        ReadOptions::new("y")
    }

    #[test]
    fn reads_numbers_and_categories() {
        let table = read_bytes("t.csv", b"a,b,y\n1.5,x,0\n2,y,1\n-3e2,x,0\n", &options()).unwrap();
        assert_eq!(table.rows, 3);
        match &table.columns[0].values {
            ColumnValues::NumericFeature { index } => {
                assert_eq!(table.numeric.column(*index).to_vec(), vec![1.5, 2.0, -300.0])
            }
            other => panic!("{other:?}"),
        }
        match &table.columns[1].values {
            ColumnValues::Categorical { codes, levels, .. } => {
                assert_eq!(levels, &vec!["x".to_string(), "y".to_string()]);
                assert_eq!(codes, &vec![0, 1, 0]);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn tolerates_bom_quotes_and_crlf() {
        let table =
            read_bytes("t.csv", b"\xEF\xBB\xBFa,\"b c\",y\r\n\"1\",\"x, \"\"q\"\"\",0\r\n2,z,1\r\n", &options())
                .unwrap();
        assert_eq!(table.columns[0].name, "a");
        assert_eq!(table.columns[1].name, "b c");
        match &table.columns[1].values {
            ColumnValues::Categorical { levels, .. } => assert_eq!(levels[0], "x, \"q\""),
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn chunks_split_only_outside_quotes() {
        let data = b"1,\"a\nb\",2\n3,\"c\",4\n5,6,7\n";
        for target in 1..data.len() + 2 {
            let ranges = crate::records::split_chunks(data, target, &crate::records::Dialect::default());
            let mut joined = Vec::new();
            for r in &ranges {
                joined.extend_from_slice(&data[r.clone()]);
                let piece = &data[r.clone()];
                assert!(piece.iter().filter(|&&b| b == b'"').count() % 2 == 0, "target {target}");
            }
            assert_eq!(joined, data.to_vec());
        }
    }

    #[test]
    fn chunking_changes_nothing() {
        let mut text = String::from("a,b,y,c\n");
        for i in 0..500 {
            let b = if i == 333 { "word".to_string() } else { format!("{}", i % 7) };
            let c = if i % 50 == 7 { "\"q\nr\"" } else { "s" };
            text.push_str(&format!("{}.25,{},{},{}\n", i, b, i % 3, c));
        }
        let whole = read_bytes_chunked("t.csv", text.as_bytes(), &options(), 1 << 20, None).unwrap();
        for chunk in [1, 7, 64, 300] {
            let chunked = read_bytes_chunked("t.csv", text.as_bytes(), &options(), chunk, None).unwrap();
            assert_eq!(format!("{chunked:?}"), format!("{whole:?}"), "chunk size {chunk}");
        }
        match &whole.columns[1].values {
            ColumnValues::Categorical { levels, codes, .. } => {
                assert_eq!(levels.len(), 8);
                assert_eq!(codes.len(), 500);
            }
            other => panic!("{other:?}"),
        }
        // Line 1 is the header; row i is on line i + 2 plus one per earlier
        // embedded newline (rows 7, 57, ..., 307 hold one each).
        assert_eq!(whole.columns[1].facts.first_text, Some((333 + 2 + 7, "word".to_string())));
        assert_eq!(whole.columns[1].facts.number_like, 499);
    }

    #[test]
    fn first_error_in_file_order_whatever_the_chunking() {
        let mut text = String::from("a,y\n");
        for i in 0..200 {
            let a = if i == 150 || i == 20 { "1,2".to_string() } else { format!("{i}") };
            text.push_str(&format!("{a},{}\n", i % 2));
        }
        for chunk in [1, 16, 1 << 20] {
            match read_bytes_chunked("t.csv", text.as_bytes(), &options(), chunk, None) {
                Err(Error::RaggedRow { at, .. }) => assert_eq!(at.line, 22),
                other => panic!("{other:?}"),
            }
        }
    }
}
