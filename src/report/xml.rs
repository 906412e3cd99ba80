//! A small XML well-formedness checker for the SVG figures and the page
//! (written as XHTML-compatible HTML: void tags self-closed, no `&` or `<` in
//! styles). It checks what a browser's XML parser would reject: unbalanced or
//! crossed tags, unquoted or duplicate attributes, bare `<` or `&`, unknown
//! entities, text after the root. It does not validate against a schema.
//!
//! Rules follow the XML 1.0 grammar (W3C Recommendation, fifth edition, §2.1
//! `document`, §3.1 start-tags and end-tags, §4.1 character and entity
//! references), restricted to what our output can contain: no DTD, no CDATA.

/// Check that `text` is one well-formed XML element, optionally preceded by
/// an XML declaration, a `<!DOCTYPE ...>` and comments. Returns the first
/// problem with its byte offset.
pub fn check_well_formed(text: &str) -> Result<(), String> {
    let b = text.as_bytes();
    let mut i = 0;
    let mut stack: Vec<&str> = Vec::new();
    let mut roots = 0;
    while i < b.len() {
        if b[i] == b'<' {
            let rest = &text[i..];
            if rest.starts_with("<!--") {
                let end = rest.find("-->").ok_or(format!("unterminated comment at byte {i}"))?;
                i += end + 3;
                continue;
            }
            if rest.starts_with("<?") {
                let end = rest.find("?>").ok_or(format!("unterminated declaration at byte {i}"))?;
                i += end + 2;
                continue;
            }
            if rest.starts_with("<!DOCTYPE") || rest.starts_with("<!doctype") {
                if roots > 0 || !stack.is_empty() {
                    return Err(format!("DOCTYPE inside the document at byte {i}"));
                }
                let end = rest.find('>').ok_or(format!("unterminated DOCTYPE at byte {i}"))?;
                i += end + 1;
                continue;
            }
            let end = tag_end(rest).ok_or(format!("unterminated tag at byte {i}"))?;
            let tag = &rest[1..end];
            if let Some(name) = tag.strip_prefix('/') {
                let name = name.trim_end();
                match stack.pop() {
                    Some(open) if open == name => {}
                    Some(open) => return Err(format!("</{name}> closes <{open}> at byte {i}")),
                    None => return Err(format!("</{name}> without an open tag at byte {i}")),
                }
            } else {
                let self_closing = tag.ends_with('/');
                let body = if self_closing { &tag[..tag.len() - 1] } else { tag };
                let name = check_start_tag(body).map_err(|m| format!("{m} at byte {i}"))?;
                if stack.is_empty() {
                    roots += 1;
                    if roots > 1 {
                        return Err(format!("a second root element <{name}> at byte {i}"));
                    }
                }
                if !self_closing {
                    stack.push(name);
                }
            }
            i += end + 1;
        } else {
            let next = text[i..].find('<').map_or(b.len(), |k| i + k);
            let chunk = &text[i..next];
            if stack.is_empty() && !chunk.trim().is_empty() {
                return Err(format!("text outside the root element at byte {i}"));
            }
            check_text(chunk).map_err(|m| format!("{m} at byte {}", i))?;
            i = next;
        }
    }
    if let Some(open) = stack.last() {
        return Err(format!("<{open}> is never closed"));
    }
    if roots == 0 {
        return Err("no root element".into());
    }
    Ok(())
}

/// Offset of the `>` closing the tag that starts at `s[0] == '<'`, skipping
/// quoted attribute values.
fn tag_end(s: &str) -> Option<usize> {
    let mut quote: Option<u8> = None;
    for (k, &c) in s.as_bytes().iter().enumerate().skip(1) {
        match quote {
            Some(q) if c == q => quote = None,
            Some(_) => {}
            None if c == b'"' || c == b'\'' => quote = Some(c),
            None if c == b'<' => return None,
            None if c == b'>' => return Some(k),
            None => {}
        }
    }
    None
}

fn is_name_char(c: char) -> bool {
    c.is_alphanumeric() || matches!(c, '-' | '_' | ':' | '.')
}

/// Check `name attr="v" ...` and return the name.
fn check_start_tag(body: &str) -> Result<&str, String> {
    let name_end = body.find(|c: char| c.is_whitespace()).unwrap_or(body.len());
    let name = &body[..name_end];
    if name.is_empty() || !name.chars().all(is_name_char) || name.starts_with(|c: char| c.is_ascii_digit()) {
        return Err(format!("bad tag name {name:?}"));
    }
    let mut rest = body[name_end..].trim_start();
    let mut seen: Vec<&str> = Vec::new();
    while !rest.is_empty() {
        let eq = rest.find('=').ok_or(format!("attribute without value in <{name}>: {rest:?}"))?;
        let attr = rest[..eq].trim();
        if attr.is_empty() || !attr.chars().all(is_name_char) {
            return Err(format!("bad attribute name {attr:?} in <{name}>"));
        }
        if seen.contains(&attr) {
            return Err(format!("duplicate attribute {attr:?} in <{name}>"));
        }
        seen.push(attr);
        let after = rest[eq + 1..].trim_start();
        let q = after.chars().next().ok_or(format!("missing value of {attr:?} in <{name}>"))?;
        if q != '"' && q != '\'' {
            return Err(format!("unquoted value of {attr:?} in <{name}>"));
        }
        let close = after[1..].find(q).ok_or(format!("unterminated value of {attr:?} in <{name}>"))?;
        let value = &after[1..1 + close];
        if value.contains('<') {
            return Err(format!("`<` inside the value of {attr:?} in <{name}>"));
        }
        check_text(value)?;
        rest = after[close + 2..].trim_start();
    }
    Ok(name)
}

/// Character data: every `&` starts a known entity or a character reference.
fn check_text(s: &str) -> Result<(), String> {
    let mut rest = s;
    while let Some(k) = rest.find('&') {
        let after = &rest[k + 1..];
        let semi = after.find(';').ok_or("bare `&`".to_string())?;
        let ent = &after[..semi];
        let ok = matches!(ent, "lt" | "gt" | "amp" | "quot" | "apos")
            || ent
                .strip_prefix("#x")
                .is_some_and(|h| !h.is_empty() && h.chars().all(|c| c.is_ascii_hexdigit()))
            || ent.strip_prefix('#').is_some_and(|d| !d.is_empty() && d.chars().all(|c| c.is_ascii_digit()));
        if !ok {
            return Err(format!("unknown entity &{ent};"));
        }
        rest = &after[semi + 1..];
    }
    Ok(())
}

/// One `<text>` of an SVG drawn by the report, with its estimated extent.
#[derive(Clone, Debug, PartialEq)]
pub struct SvgText {
    /// Left end, pixels (from `x` and `text-anchor`).
    pub left: f64,
    /// Right end, pixels: the text is taken as 0.55 em per character
    /// (a common estimate for sans-serif type); a rotated text's extent is
    /// along y, so its left and right are both `x`.
    pub right: f64,
    /// Baseline `y`, pixels.
    pub y: f64,
    /// The text, entities decoded.
    pub text: String,
}

/// Every `<text>` element of `svg` (as plotters writes them: attributes
/// `x`, `y`, `font-size`, `text-anchor`, optional `transform`), for the
/// tests that keep labels inside their figure.
pub fn svg_texts(svg: &str) -> Vec<SvgText> {
    let mut out = Vec::new();
    let mut rest = svg;
    while let Some(a) = rest.find("<text ") {
        let head_end = match rest[a..].find('>') {
            Some(e) => a + e,
            None => break,
        };
        let head = &rest[a..head_end];
        let close = rest[head_end..].find("</text>").map_or(rest.len(), |e| head_end + e);
        let body = rest[head_end + 1..close].trim();
        let attr = |k: &str| {
            head.split(&format!(" {k}=\"")).nth(1).and_then(|v| v.split('"').next()).map(str::to_string)
        };
        let num = |k: &str| attr(k).and_then(|v| v.parse::<f64>().ok()).unwrap_or(0.0);
        let text = body
            .replace("&lt;", "<")
            .replace("&gt;", ">")
            .replace("&quot;", "\"")
            .replace("&#39;", "'")
            .replace("&amp;", "&");
        let (x, size) = (num("x"), num("font-size"));
        let w = 0.55 * size * text.chars().count() as f64;
        let (left, right) = if attr("transform").is_some() {
            (x, x)
        } else {
            match attr("text-anchor").as_deref() {
                Some("middle") => (x - w / 2.0, x + w / 2.0),
                Some("end") => (x - w, x),
                _ => (x, x + w),
            }
        };
        out.push(SvgText { left, right, y: num("y"), text });
        rest = &rest[close.min(rest.len())..];
        if rest.len() == svg.len() {
            break;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn accepts_well_formed_documents() {
        check_well_formed(
            r#"<svg a="1" b='2'><g><text x="0">a &lt; b &amp; &#176; &#x3B1;</text></g><rect/></svg>"#,
        )
        .unwrap();
        check_well_formed("<!DOCTYPE html>\n<html><!-- c --><body><p>x > y</p></body></html>\n").unwrap();
        check_well_formed("<?xml version=\"1.0\"?><a/>").unwrap();
    }

    #[test]
    fn rejects_what_an_xml_parser_rejects() {
        let bad = [
            "<a><b></a></b>",
            "<a>",
            "</a>",
            "<a></a><b></b>",
            "<a x=1></a>",
            "<a x=\"1\" x=\"2\"></a>",
            "<a>1 < 2</a>",
            "<a>fish & chips</a>",
            "<a>&nbsp;</a>",
            "<a x=\"&\"></a>",
            "text<a></a>",
            "<a></a>trailing",
            "",
            "<1a></1a>",
        ];
        for doc in bad {
            assert!(check_well_formed(doc).is_err(), "accepted {doc:?}");
        }
    }
}
