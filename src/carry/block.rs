//! The carried experiment's on-page form: one `<script type="application/octet-stream">`
//! element, which browsers neither render nor run (so the report's Content-Security-Policy
//! still holds and the page is no slower), holding the deflated payload in base64.
//! Its `data-blake3` attribute is the hash of the deflated bytes, so a block that was
//! truncated or edited is refused before anything is inflated.

use base64::Engine;
use base64::engine::general_purpose::STANDARD as BASE64;

use super::CarryError;

/// The element's opening, exactly as written; a reader looks for its last occurrence
/// (raw HTML in prose, allowed with `--allow-html`, comes before it).
const OPENING: &str = r#"<script type="application/octet-stream" id="stet-experiment""#;
const CLOSING: &str = "</script>";

/// The largest payload a block may declare: past it the block is not one stet wrote
/// (a document and files under `--max-file-mb` each, which a report carries only when
/// they compress under `--embed-data-mb`).
const MAX_PAYLOAD_BYTES: u64 = 4 << 30;

/// A payload made ready for the page.
pub(super) struct Encoded {
    /// The whole element.
    pub(super) html: String,
    /// The payload's size once deflated, which is what `--embed-data-mb` limits.
    pub(super) deflated_bytes: u64,
}

/// The element holding `payload`, deflated and base64-encoded.
pub(super) fn encode(payload: &[u8]) -> Encoded {
    let deflated = miniz_oxide::deflate::compress_to_vec(payload, 6);
    let hash = blake3::hash(&deflated);
    let html = format!(
        "{OPENING} data-bytes=\"{}\" data-blake3=\"{}\">{}{CLOSING}",
        payload.len(),
        hash.to_hex(),
        BASE64.encode(&deflated)
    );
    Encoded {
        html,
        deflated_bytes: deflated.len() as u64,
    }
}

/// The payload of the block in `html`, checked against its hash.
pub(super) fn decode(html: &[u8]) -> Result<Vec<u8>, CarryError> {
    let start = find_last(html, OPENING.as_bytes()).ok_or(CarryError::NotAReport)?;
    let rest = &html[start + OPENING.len()..];
    let tag_end = rest
        .iter()
        .position(|&byte| byte == b'>')
        .ok_or(CarryError::Damaged("its opening tag is cut off"))?;
    let attributes = std::str::from_utf8(&rest[..tag_end])
        .map_err(|_| CarryError::Damaged("its opening tag is not text"))?;
    let body = &rest[tag_end + 1..];
    // Base64 holds no '<', so the first closing tag ends the block.
    let body_end = find_first(body, CLOSING.as_bytes()).ok_or(CarryError::Damaged(
        "it has no end (the report was cut short)",
    ))?;
    let declared_bytes: u64 = attribute(attributes, "data-bytes")
        .and_then(|text| text.parse().ok())
        .ok_or(CarryError::Damaged("its length attribute is missing"))?;
    let declared_hash = attribute(attributes, "data-blake3")
        .and_then(|text| blake3::Hash::from_hex(text).ok())
        .ok_or(CarryError::Damaged("its checksum attribute is missing"))?;
    if declared_bytes > MAX_PAYLOAD_BYTES {
        return Err(CarryError::Damaged(
            "it declares more bytes than stet writes",
        ));
    }
    let deflated = BASE64
        .decode(&body[..body_end])
        .map_err(|_| CarryError::Damaged("its contents are not base64"))?;
    if blake3::hash(&deflated) != declared_hash {
        return Err(CarryError::Damaged(
            "its checksum does not match its contents (it was truncated or edited)",
        ));
    }
    let payload =
        miniz_oxide::inflate::decompress_to_vec_with_limit(&deflated, declared_bytes as usize)
            .map_err(|_| CarryError::Damaged("its contents do not inflate"))?;
    if payload.len() as u64 != declared_bytes {
        return Err(CarryError::Damaged(
            "its contents are shorter than declared",
        ));
    }
    Ok(payload)
}

/// The value of `name="…"` among an opening tag's attributes.
fn attribute<'a>(attributes: &'a str, name: &str) -> Option<&'a str> {
    let marker = format!(" {name}=\"");
    let start = attributes.find(&marker)? + marker.len();
    let length = attributes[start..].find('"')?;
    Some(&attributes[start..start + length])
}

fn find_first(haystack: &[u8], needle: &[u8]) -> Option<usize> {
    haystack
        .windows(needle.len())
        .position(|window| window == needle)
}

fn find_last(haystack: &[u8], needle: &[u8]) -> Option<usize> {
    haystack
        .windows(needle.len())
        .rposition(|window| window == needle)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_block_decodes_to_the_payload_it_was_made_from() {
        let payload = b"experiment\n".repeat(1000);
        let html = format!("<p>before</p>{}<p>after</p>", encode(&payload).html);
        assert_eq!(decode(html.as_bytes()).unwrap(), payload);
    }

    #[test]
    fn a_changed_character_in_the_block_fails_its_checksum() {
        let block = encode(b"experiment").html;
        let at = block.rfind(CLOSING).unwrap() - 3;
        let mut edited = block.into_bytes();
        edited[at] = if edited[at] == b'A' { b'B' } else { b'A' };
        assert!(matches!(decode(&edited), Err(CarryError::Damaged(_))));
    }

    #[test]
    fn html_without_a_block_is_not_a_report() {
        assert!(matches!(
            decode(b"<html><body>hello</body></html>"),
            Err(CarryError::NotAReport)
        ));
    }
}
