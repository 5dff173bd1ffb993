//! `--memory-limit SIZE` of the commands that fit (`fit`, `compare`): the
//! most memory one fit may take, as bytes or with a binary suffix.

/// The flag.
#[derive(Debug, Clone, Copy, clap::Args)]
pub struct MemoryArgs {
    /// The most memory one fit may take: bytes, or a number with K, M, G or T (binary units: 8G is 8 GiB) [default: half the machine's memory].
    #[arg(long, value_name = "SIZE", value_parser = parse_size)]
    pub memory_limit: Option<u64>,
}

/// `8G`, `512M`, `1.5G`, `1048576`: bytes.
fn parse_size(text: &str) -> Result<u64, String> {
    let trimmed = text.trim();
    let (number, unit) = match trimmed.char_indices().find(|(_, c)| c.is_ascii_alphabetic()) {
        Some((i, _)) => trimmed.split_at(i),
        None => (trimmed, ""),
    };
    let factor: u64 = match unit.to_ascii_uppercase().trim_end_matches("IB").trim_end_matches('B') {
        "" => 1,
        "K" => 1 << 10,
        "M" => 1 << 20,
        "G" => 1 << 30,
        "T" => 1 << 40,
        _ => return Err(format!("'{text}' is not a size: write bytes, or a number with K, M, G or T")),
    };
    match number.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 && v * (factor as f64) < 1.8e19 => Ok((v * factor as f64) as u64),
        _ => Err(format!("'{text}' is not a size: write bytes, or a number with K, M, G or T")),
    }
}

#[cfg(test)]
mod tests {
    use super::parse_size;

    #[test]
    fn sizes() {
        assert_eq!(parse_size("8G"), Ok(8 << 30));
        assert_eq!(parse_size("512m"), Ok(512 << 20));
        assert_eq!(parse_size("1.5GiB"), Ok(3 << 29));
        assert_eq!(parse_size("1048576"), Ok(1 << 20));
        for bad in ["", "G", "-1G", "8X", "0", "nanG"] {
            assert!(parse_size(bad).is_err(), "{bad}");
        }
    }
}
