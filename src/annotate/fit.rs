//! Fitting a string into a box: shrink first, then wrap at spaces, then (last resort) shorten with an
//! ellipsis at a glyph boundary. A glyph is never cut in half.

use super::text::{measure_text_weighted, Weight};

/// Line spacing as a multiple of the text size. Common practice, no source.
pub const LINE_SPACING: f32 = 1.18;

/// Text set to fit a box: the size chosen and the lines to draw.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedText {
    /// Text size in pixels (line box height).
    pub size_px: f32,
    /// The lines, top to bottom.
    pub lines: Vec<String>,
    /// Width of the widest line in pixels.
    pub width: f32,
    /// Height of all lines in pixels.
    pub height: f32,
    /// Typeface weight.
    pub weight: Weight,
}

impl FittedText {
    /// No text at all (an element with nothing to say).
    pub fn empty(weight: Weight) -> Self {
        FittedText {
            size_px: 0.0,
            lines: Vec::new(),
            width: 0.0,
            height: 0.0,
            weight,
        }
    }
}

fn width_of(size: f32, s: &str, weight: Weight) -> f32 {
    measure_text_weighted(size, s, weight).0
}

/// Greedy wrap at spaces; a word wider than `max_w` on its own is broken between characters.
fn wrap(text: &str, size: f32, max_w: f32, weight: Weight) -> Vec<String> {
    let mut lines = Vec::new();
    let mut current = String::new();
    for word in text.split_whitespace() {
        let candidate = if current.is_empty() {
            word.to_string()
        } else {
            format!("{current} {word}")
        };
        if width_of(size, &candidate, weight) <= max_w {
            current = candidate;
            continue;
        }
        if !current.is_empty() {
            lines.push(std::mem::take(&mut current));
        }
        if width_of(size, word, weight) <= max_w {
            current = word.to_string();
        } else {
            // Break the long word between characters.
            for c in word.chars() {
                let mut next = current.clone();
                next.push(c);
                if !current.is_empty() && width_of(size, &next, weight) > max_w {
                    lines.push(std::mem::take(&mut current));
                    current.push(c);
                } else {
                    current = next;
                }
            }
        }
    }
    if !current.is_empty() {
        lines.push(current);
    }
    lines
}

/// Shortens `line` at a character boundary and appends an ellipsis so it fits `max_w`.
fn shorten(line: &str, size: f32, max_w: f32, weight: Weight) -> String {
    if width_of(size, line, weight) <= max_w {
        return line.to_string();
    }
    let chars: Vec<char> = line.chars().collect();
    for keep in (0..chars.len()).rev() {
        let s: String = chars[..keep]
            .iter()
            .collect::<String>()
            .trim_end()
            .to_string()
            + "…";
        if width_of(size, &s, weight) <= max_w {
            return s;
        }
    }
    String::new()
}

/// Sets `text` at `preferred_px`, shrinking by steps of 8 % down to `min_px` until it fits in
/// `max_w` pixels on at most `max_lines` lines; below that, wraps at `min_px` and shortens the last
/// line with an ellipsis. Lines that cannot hold even one glyph are left out.
pub fn fit_text(
    text: &str,
    weight: Weight,
    preferred_px: f32,
    min_px: f32,
    max_w: f32,
    max_lines: usize,
) -> FittedText {
    let text = text.trim();
    // Written so NaN sizes also take this exit.
    if text.is_empty()
        || max_lines == 0
        || max_w.is_nan()
        || max_w <= 0.0
        || preferred_px.is_nan()
        || preferred_px <= 0.0
    {
        return FittedText::empty(weight);
    }
    let min_px = min_px.min(preferred_px).max(1.0);
    let mut size = preferred_px;
    loop {
        let lines = wrap(text, size, max_w, weight);
        let fits =
            lines.len() <= max_lines && lines.iter().all(|l| width_of(size, l, weight) <= max_w);
        if fits {
            return finish(lines, size, weight);
        }
        if size <= min_px {
            let mut lines = wrap(text, size, max_w, weight);
            let overflow = lines.len() > max_lines;
            lines.truncate(max_lines);
            if let Some(last) = lines.last_mut() {
                let mut l = last.clone();
                if overflow {
                    l.push('…');
                }
                *last = shorten(&l, size, max_w, weight);
            }
            lines.retain(|l| !l.is_empty());
            return finish(lines, size, weight);
        }
        size = (size * 0.92).max(min_px);
    }
}

fn finish(lines: Vec<String>, size: f32, weight: Weight) -> FittedText {
    let width = lines
        .iter()
        .map(|l| width_of(size, l, weight))
        .fold(0.0, f32::max);
    let height = if lines.is_empty() {
        0.0
    } else {
        size + (lines.len() - 1) as f32 * size * LINE_SPACING
    };
    FittedText {
        size_px: size,
        lines,
        width,
        height,
        weight,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_text_keeps_its_size() {
        let f = fit_text("2031-05-14", Weight::Bold, 30.0, 8.0, 400.0, 1);
        assert_eq!(f.size_px, 30.0);
        assert_eq!(f.lines, vec!["2031-05-14".to_string()]);
    }

    #[test]
    fn long_text_shrinks_then_wraps_and_always_fits() {
        let title =
            "A very long title for the northern transgressive dune of the invented headland";
        let f = fit_text(title, Weight::Bold, 20.0, 12.0, 200.0, 2);
        assert!(f.size_px < 20.0 && f.size_px >= 12.0);
        assert!(f.lines.len() <= 2);
        for l in &f.lines {
            assert!(width_of(f.size_px, l, Weight::Bold) <= 200.0);
        }
        // Nothing is lost unless the ellipsis says so.
        let joined = f.lines.join(" ");
        assert!(joined == title || joined.ends_with('…'), "{joined}");
    }

    #[test]
    fn impossible_box_gives_whole_glyphs_or_nothing() {
        let f = fit_text("Interpolated", Weight::Regular, 12.0, 6.0, 20.0, 1);
        for l in &f.lines {
            assert!(width_of(f.size_px, l, Weight::Regular) <= 20.0);
        }
        let none = fit_text("W", Weight::Regular, 12.0, 6.0, 0.5, 1);
        assert!(none.lines.is_empty());
    }
}
