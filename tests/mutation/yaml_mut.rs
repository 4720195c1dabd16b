//! Mutations of a job file: truncations, byte edits, huge and non-finite numbers, values of the
//! wrong type, deep nesting, alias expansion, repeated and removed lines.
//!
//! Mutations work on bytes, so a case may leave the text invalid UTF-8: the job reader must say
//! so, not stop.

use super::rng::Rng;

/// Bytes with a meaning in YAML, and a few that break text.
const SIGNIFICANT: &[u8] = b":-[]{},&*!|>#\"'\t\n %@`?\\\r\0\xff\xc3";

/// Numbers that break ranges and parsers.
const NUMBERS: &[&str] = &[
    "0",
    "-0",
    "-1",
    "1e309",
    "-1e309",
    ".nan",
    ".inf",
    "-.inf",
    "NaN",
    "1e-320",
    "4294967296",
    "18446744073709551616",
    "-9223372036854775809",
    "99999999999999999999999999999999999999",
    "0x7FFFFFFF",
    "0o777",
    "65536",
    "2147483648",
    "1_000_000",
    "3.4028236e38",
];

/// Values of the wrong type.
const WRONG: &[&str] = &[
    "[1, 2]",
    "{a: 1}",
    "\"text\"",
    "true",
    "null",
    "~",
    "''",
    "[]",
    "{}",
    "!!binary aGVsbG8=",
    "!custom 3",
    "2041-13-45",
    "- nested",
    "|\n    block text",
    "[[1, 2], [3]]",
];

/// Where the scalar values of a text lie: (start, end) of each text after `: ` or `- ` up to the
/// line's end, a comment, a comma or a closing bracket.
fn values(text: &[u8]) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut i = 0;
    while i + 1 < text.len() {
        if (text[i] == b':' || text[i] == b'-' || text[i] == b'[') && text[i + 1] == b' ' {
            let start = i + 2;
            let mut end = start;
            while end < text.len() && !b"\n#,]}".contains(&text[end]) {
                end += 1;
            }
            if end > start && !b"{[".contains(&text[start]) {
                out.push((start, end));
            }
        }
        i += 1;
    }
    out
}

/// Line starts of a text (and its end).
fn lines(text: &[u8]) -> Vec<usize> {
    let mut v = vec![0];
    v.extend(
        text.iter()
            .enumerate()
            .filter(|(_, c)| **c == b'\n')
            .map(|(i, _)| i + 1),
    );
    v
}

fn replace(b: &mut Vec<u8>, (s, e): (usize, usize), with: &[u8]) {
    b.splice(s..e, with.iter().copied());
}

/// Applies one random mutation to a job text and says what it did.
pub fn mutate(rng: &mut Rng, b: &mut Vec<u8>) -> String {
    let len = b.len();
    match rng.below(12) {
        0 => {
            // Truncation anywhere, or at a line start.
            let cut = if rng.below(2) == 0 {
                rng.below(len as u64) as usize
            } else {
                let l = lines(b);
                l[rng.below(l.len() as u64) as usize].min(len)
            };
            b.truncate(cut);
            format!("truncated at {cut}")
        }
        1 | 2 => {
            let n = 1 + rng.below(4) as usize;
            let mut at = Vec::new();
            for _ in 0..n {
                let i = rng.below(b.len().max(1) as u64) as usize;
                if i >= b.len() {
                    break;
                }
                let v = if rng.below(2) == 0 {
                    SIGNIFICANT[rng.below(SIGNIFICANT.len() as u64) as usize]
                } else {
                    rng.next() as u8
                };
                b[i] = v;
                at.push(format!("{i}:={v:#04x}"));
            }
            format!("byte edits {}", at.join(","))
        }
        3 | 4 => {
            let v = values(b);
            if v.is_empty() {
                return mutate(rng, b);
            }
            let place = v[rng.below(v.len() as u64) as usize];
            let n = NUMBERS[rng.below(NUMBERS.len() as u64) as usize];
            replace(b, place, n.as_bytes());
            format!("value at {} := {n}", place.0)
        }
        5 | 6 => {
            let v = values(b);
            if v.is_empty() {
                return mutate(rng, b);
            }
            let place = v[rng.below(v.len() as u64) as usize];
            let w = WRONG[rng.below(WRONG.len() as u64) as usize];
            replace(b, place, w.as_bytes());
            format!("value at {} := {w:?}", place.0)
        }
        7 => {
            // Deep nesting in flow or block style, in place of a value.
            let v = values(b);
            if v.is_empty() {
                return mutate(rng, b);
            }
            let place = v[rng.below(v.len() as u64) as usize];
            let depth = [64usize, 129, 1_000, 20_000][rng.below(4) as usize];
            let nested = match rng.below(3) {
                0 => format!("{}1{}", "[".repeat(depth), "]".repeat(depth)),
                1 => format!("{}1{}", "{a: ".repeat(depth), "}".repeat(depth)),
                // Unclosed: the parser meets the end of the text deep inside.
                _ => "[".repeat(depth),
            };
            replace(b, place, nested.as_bytes());
            format!("value at {} := nesting {depth} deep", place.0)
        }
        8 => {
            // Alias expansion ("billion laughs"): nine levels of nine aliases each.
            let mut bomb = String::from("\nbomb0: &b0 [x, x, x, x, x, x, x, x, x]\n");
            for k in 1..10 {
                let p = k - 1;
                bomb.push_str(&format!(
                    "bomb{k}: &b{k} [*b{p}, *b{p}, *b{p}, *b{p}, *b{p}, *b{p}, *b{p}, *b{p}, *b{p}]\n"
                ));
            }
            let l = lines(b);
            let at = l[rng.below(l.len() as u64) as usize].min(b.len());
            b.splice(at..at, bomb.bytes());
            format!("alias expansion inserted at {at}")
        }
        9 => {
            // A line removed, repeated, or indented differently.
            let l = lines(b);
            if l.len() < 3 {
                return mutate(rng, b);
            }
            let k = rng.below(l.len() as u64 - 1) as usize;
            let (s, e) = (l[k], l[k + 1].min(b.len()));
            match rng.below(3) {
                0 => {
                    b.drain(s..e);
                    format!("line {} removed", k + 1)
                }
                1 => {
                    let line: Vec<u8> = b[s..e].to_vec();
                    b.splice(s..s, line);
                    format!("line {} repeated", k + 1)
                }
                _ => {
                    let pad = [&b" "[..], b"  ", b"   ", b"\t"][rng.below(4) as usize];
                    b.splice(s..s, pad.iter().copied());
                    format!(
                        "line {} indented by {:?}",
                        k + 1,
                        String::from_utf8_lossy(pad)
                    )
                }
            }
        }
        10 => {
            // A very long text or list in place of a value.
            let v = values(b);
            if v.is_empty() {
                return mutate(rng, b);
            }
            let place = v[rng.below(v.len() as u64) as usize];
            let long = match rng.below(3) {
                0 => "x".repeat(200_000),
                1 => format!("[{}]", vec!["1"; 50_000].join(", ")),
                _ => format!("\"{}\"", "\\u00e9".repeat(20_000)),
            };
            replace(b, place, long.as_bytes());
            format!(
                "value at {} := a long value ({} bytes)",
                place.0,
                long.len()
            )
        }
        _ => {
            // A date made impossible, or a key misspelt.
            let text = String::from_utf8_lossy(b).into_owned();
            if let Some(i) = text.find("date: ") {
                let bad = [
                    "2041-02-30",
                    "2041-00-10",
                    "0000-01-01",
                    "9999-12-31",
                    "41-5-3",
                    "2041-5-3T00",
                ][rng.below(6) as usize];
                let end = text[i + 6..]
                    .find(['\n', ',', '}'])
                    .map_or(text.len(), |e| i + 6 + e);
                replace(b, (i + 6, end), bad.as_bytes());
                format!("a date := {bad}")
            } else {
                mutate(rng, b)
            }
        }
    }
}
