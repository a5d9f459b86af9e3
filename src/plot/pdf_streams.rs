//! Deflating the streams of a PDF that svg2pdf wrote uncompressed, at a
//! level of our choosing (svg2pdf's own is fixed at 6: on a map of a
//! thousand cells that took 3-4 ms of a 10 ms figure, level 3 about 1 ms
//! for a file 3 % larger).
//!
//! It reads the layout svg2pdf's writer (pdf-writer) produces: objects
//! `N 0 obj\n<<\n  /Key value\n...>>\nstream\n<data>\nendstream\nendobj\n`
//! with the top-level keys indented by two spaces and a direct `/Length`,
//! then a classic cross-reference table, the trailer and `startxref`.
//! Invariants: a stream that already names a `/Filter` is copied as it is;
//! every other stream is replaced by its zlib deflation, with `/Length`
//! and `/Filter /FlateDecode` set; the cross-reference table and
//! `startxref` are rewritten for the new offsets, nothing else changes.
//! Anything not laid out as expected leaves the whole file unchanged
//! (uncompressed, still valid): never a broken file.

/// Deflate level (miniz: 1 fastest .. 9 smallest).
const LEVEL: u8 = 3;

/// `pdf` with its unfiltered streams deflated, or `pdf` itself when its
/// layout is not the one described in the module docs.
pub(crate) fn deflate_streams(pdf: Vec<u8>) -> Vec<u8> {
    match rewrite(&pdf) {
        Some(out) => out,
        None => pdf,
    }
}

/// One entry of the cross-reference table.
#[derive(Clone, Copy)]
struct Entry {
    offset: usize,
    generation: u32,
    in_use: bool,
}

fn rewrite(pdf: &[u8]) -> Option<Vec<u8>> {
    let xref_at = startxref(pdf)?;
    let (first, entries, trailer_at) = xref_table(pdf, xref_at)?;
    // Objects in file order; each runs to the next one or to the table.
    let mut order: Vec<usize> = (0..entries.len()).filter(|&i| entries[i].in_use).collect();
    order.sort_by_key(|&i| entries[i].offset);
    let start = entries[*order.first()?].offset;
    let mut out = Vec::with_capacity(pdf.len());
    out.extend_from_slice(&pdf[..start]);
    let mut offsets = vec![0usize; entries.len()];
    for (k, &i) in order.iter().enumerate() {
        let from = entries[i].offset;
        let to = order.get(k + 1).map_or(xref_at, |&j| entries[j].offset);
        if from > to || to > pdf.len() {
            return None;
        }
        offsets[i] = out.len();
        let object = &pdf[from..to];
        if !object.starts_with(format!("{} {} obj\n", first + i, entries[i].generation).as_bytes())
        {
            return None;
        }
        match stream_parts(object)? {
            Some(parts) if !parts.filtered => write_deflated(&mut out, &parts),
            _ => out.extend_from_slice(object),
        }
    }
    let new_xref = out.len();
    out.extend_from_slice(format!("xref\n{} {}\n", first, entries.len()).as_bytes());
    for (i, e) in entries.iter().enumerate() {
        let (offset, kind) = if e.in_use {
            (offsets[i], 'n')
        } else {
            (e.offset, 'f')
        };
        out.extend_from_slice(format!("{offset:010} {:05} {kind}\r\n", e.generation).as_bytes());
    }
    let tail = &pdf[trailer_at..];
    let marker = b"startxref\n";
    let at = find_last(tail, marker)?;
    out.extend_from_slice(&tail[..at + marker.len()]);
    out.extend_from_slice(format!("{new_xref}\n%%EOF").as_bytes());
    Some(out)
}

/// The offset after the last `startxref`.
fn startxref(pdf: &[u8]) -> Option<usize> {
    let marker = b"startxref\n";
    let at = find_last(pdf, marker)? + marker.len();
    let rest = &pdf[at..];
    let end = rest.iter().position(|&b| b == b'\n')?;
    if &rest[end..] != b"\n%%EOF" {
        return None;
    }
    std::str::from_utf8(&rest[..end]).ok()?.parse().ok()
}

/// The table at `at`: its first object number, its entries, and the
/// offset just after it (the trailer).
fn xref_table(pdf: &[u8], at: usize) -> Option<(usize, Vec<Entry>, usize)> {
    let text = pdf.get(at..)?;
    let text = text.strip_prefix(b"xref\n")?;
    let line_end = text.iter().position(|&b| b == b'\n')?;
    let head = std::str::from_utf8(&text[..line_end]).ok()?;
    let (first, count) = head.split_once(' ')?;
    let (first, count): (usize, usize) = (first.parse().ok()?, count.parse().ok()?);
    let body = &text[line_end + 1..];
    let mut entries = Vec::with_capacity(count);
    for k in 0..count {
        let e = body.get(20 * k..20 * (k + 1))?;
        let line = std::str::from_utf8(e).ok()?;
        if !line.ends_with("\r\n") || &line[10..11] != " " || &line[16..17] != " " {
            return None;
        }
        entries.push(Entry {
            offset: line[..10].parse().ok()?,
            generation: line[11..16].parse().ok()?,
            in_use: match &line[17..18] {
                "n" => true,
                "f" => false,
                _ => return None,
            },
        });
    }
    let trailer_at = pdf.len() - body.len() + 20 * count;
    Some((first, entries, trailer_at))
}

/// A stream object split at its `/Length` line: the bytes before that
/// line, after it up to and including `stream\n`, the data, and whether
/// the dictionary names a filter.
struct StreamParts<'a> {
    head: &'a [u8],
    rest_of_dict: &'a [u8],
    data: &'a [u8],
    filtered: bool,
}

/// Some(None) for an object without a stream, None for a layout not
/// understood.
fn stream_parts(object: &[u8]) -> Option<Option<StreamParts<'_>>> {
    let dict_end = b"\n>>\nstream\n";
    let Some(at) = find(object, dict_end) else {
        return Some(None);
    };
    let data_from = at + dict_end.len();
    let dict = &object[..at + 1];
    let length_key = b"\n  /Length ";
    let key_at = find(dict, length_key)?;
    let value_from = key_at + length_key.len();
    let value_len = dict[value_from..].iter().position(|&b| b == b'\n')?;
    let length: usize = std::str::from_utf8(&dict[value_from..value_from + value_len])
        .ok()?
        .parse()
        .ok()?;
    let data = object.get(data_from..data_from + length)?;
    if &object[data_from + length..] != b"\nendstream\nendobj\n\n" {
        return None;
    }
    Some(Some(StreamParts {
        head: &object[..key_at + 1],
        rest_of_dict: &object[value_from + value_len + 1..data_from],
        data,
        filtered: find(dict, b"\n  /Filter ").is_some(),
    }))
}

/// The object of `parts` with its data deflated.
fn write_deflated(out: &mut Vec<u8>, parts: &StreamParts<'_>) {
    let packed = miniz_oxide::deflate::compress_to_vec_zlib(parts.data, LEVEL);
    out.extend_from_slice(parts.head);
    out.extend_from_slice(
        format!("  /Length {}\n  /Filter /FlateDecode\n", packed.len()).as_bytes(),
    );
    out.extend_from_slice(parts.rest_of_dict);
    out.extend_from_slice(&packed);
    out.extend_from_slice(b"\nendstream\nendobj\n\n");
}

fn find(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).position(|w| w == needle)
}

fn find_last(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).rposition(|w| w == needle)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A PDF in pdf-writer's layout: objects 1 (a dictionary), 2 (an
    /// unfiltered stream), 3 (a filtered one), object 0 free.
    fn sample() -> Vec<u8> {
        let objects = [
            "1 0 obj\n<<\n  /Type /Catalog\n>>\nendobj\n\n".to_string(),
            "2 0 obj\n<<\n  /Length 25\n  /Type /XObject\n>>\nstream\n0 0 m 1 1 l S 0 0 m 1 1 l\nendstream\nendobj\n\n".to_string(),
            "3 0 obj\n<<\n  /Length 3\n  /Filter /FlateDecode\n>>\nstream\nabc\nendstream\nendobj\n\n".to_string(),
        ];
        let mut pdf = b"%PDF-1.7\n\n".to_vec();
        let mut offsets = Vec::new();
        for o in &objects {
            offsets.push(pdf.len());
            pdf.extend_from_slice(o.as_bytes());
        }
        let xref = pdf.len();
        pdf.extend_from_slice(b"xref\n0 4\n0000000000 65535 f\r\n");
        for o in offsets {
            pdf.extend_from_slice(format!("{o:010} 00000 n\r\n").as_bytes());
        }
        pdf.extend_from_slice(
            format!("trailer\n<<\n  /Size 4\n>>\nstartxref\n{xref}\n%%EOF").as_bytes(),
        );
        pdf
    }

    /// Every in-use entry points at its object, startxref at the table.
    fn check_offsets(pdf: &[u8]) {
        let at = startxref(pdf).unwrap();
        assert!(pdf[at..].starts_with(b"xref\n"));
        let (first, entries, _) = xref_table(pdf, at).unwrap();
        for (i, e) in entries.iter().enumerate().filter(|(_, e)| e.in_use) {
            assert!(pdf[e.offset..].starts_with(format!("{} 0 obj\n", first + i).as_bytes()));
        }
    }

    #[test]
    fn unfiltered_streams_are_deflated_and_offsets_follow() {
        let pdf = sample();
        check_offsets(&pdf);
        let out = deflate_streams(pdf.clone());
        assert_ne!(out, pdf);
        check_offsets(&out);
        let text = String::from_utf8_lossy(&out);
        assert_eq!(text.matches("/Filter /FlateDecode").count(), 2);
        // Object 2's data inflates back to the original; object 3 is copied.
        let (_, entries, _) = xref_table(&out, startxref(&out).unwrap()).unwrap();
        let two = &out[entries[2].offset..entries[3].offset];
        let parts = stream_parts(two).unwrap().unwrap();
        let plain = miniz_oxide::inflate::decompress_to_vec_zlib(parts.data).unwrap();
        assert_eq!(plain, b"0 0 m 1 1 l S 0 0 m 1 1 l");
        assert!(out.windows(9).any(|w| w == b"\nabc\nends"));
        assert!(out.ends_with(b"%%EOF"));
    }

    #[test]
    fn a_layout_not_understood_is_left_as_it_is() {
        let mut pdf = sample();
        // A stream shorter than its /Length says.
        let at = find(&pdf, b"/Length 25").unwrap();
        pdf[at + 8..at + 10].copy_from_slice(b"24");
        assert_eq!(deflate_streams(pdf.clone()), pdf);
        let truncated = sample()[..200].to_vec();
        assert_eq!(deflate_streams(truncated.clone()), truncated);
    }
}
