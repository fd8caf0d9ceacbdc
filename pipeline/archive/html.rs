//! `index.html` at the archive root: the archive's index as one static page, for a browser opened on the
//! folder (no server, no network, no fonts or scripts from elsewhere; the styles are inline).
//!
//! Funds in folder order, each with its packs, latest as-of first and, within a month, latest revision
//! first: status, signers and their times, pack id, and relative links to the PDF (the final one once
//! final), the summary and the manifest. Every text from a config or a signer is HTML-escaped and every
//! link's path percent-encoded, so a fund name cannot add markup. Built from the same rows as
//! index.csv/index.json, it holds no clock and is rebuilt with them.

/// One pack as the page shows it.
pub struct Row {
    /// The fund's folder in the archive.
    pub folder: String,
    /// The fund's name from the pack's manifest.
    pub fund: String,
    pub as_of: String,
    pub revision: u32,
    pub pack_id: String,
    pub status: String,
    /// `role:name` and the UTC time of each signature, in signing order.
    pub signers: Vec<(String, String)>,
    /// Who finalised the pack and when, once final.
    pub finalised: Option<(String, String)>,
    /// The pack folder relative to the archive root, with `/`.
    pub path: String,
}

/// The page for these rows (in index order: fund, as-of, revision ascending).
pub fn page(rows: &[Row]) -> String {
    let mut funds: Vec<&str> = rows.iter().map(|r| r.folder.as_str()).collect();
    funds.dedup();
    let mut body = String::new();
    for folder in &funds {
        let mut packs: Vec<&Row> = rows.iter().filter(|r| r.folder == *folder).collect();
        packs.sort_by(|a, b| (&b.as_of, b.revision).cmp(&(&a.as_of, a.revision)));
        body.push_str(&fund_section(folder, &packs));
    }
    if rows.is_empty() {
        body.push_str("<p>The archive holds no pack yet.</p>\n");
    }
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>Pack archive</title>\n<style>\n{STYLE}</style>\n</head>\n<body>\n\
         <h1>Pack archive</h1>\n<p class=\"lead\">{} pack(s) of {} fund(s). Links open the files in this \
         folder; <code>tailpack verify</code> on this folder checks every pack, its signatures and this \
         index.</p>\n{body}</body>\n</html>\n",
        rows.len(),
        funds.len()
    )
}

const STYLE: &str = "body { font-family: system-ui, sans-serif; margin: 2rem auto; max-width: 70rem; \
padding: 0 1rem; color: #1d2a33; background: #fbfaf7; }\n\
h1 { font-weight: 600; border-bottom: 3px solid #2f6f73; padding-bottom: .3rem; }\n\
h2 { margin-top: 2.2rem; margin-bottom: .2rem; }\n\
.folder, .lead { color: #5a6770; margin-top: 0; }\n\
table { border-collapse: collapse; width: 100%; font-size: .92rem; }\n\
th { text-align: left; background: #e6ecea; }\n\
th, td { padding: .35rem .5rem; border-bottom: 1px solid #d5dbd8; vertical-align: top; }\n\
td ul { margin: 0; padding-left: 1rem; }\n\
td:first-child, td small { white-space: nowrap; }\n\
code.id { font-size: .8rem; word-break: break-all; }\n\
.status { font-weight: 600; text-transform: uppercase; font-size: .8rem; }\n\
.status-final { color: #1f6b3a; } .status-signing { color: #8a5a00; } .status-draft { color: #5a6770; }\n";

fn fund_section(folder: &str, packs: &[&Row]) -> String {
    let name = packs.first().map_or(folder, |r| r.fund.as_str());
    let mut s = format!(
        "<section class=\"fund\">\n<h2>{}</h2>\n<p class=\"folder\">folder {}/</p>\n<table>\n\
         <thead><tr><th>As of</th><th>Revision</th><th>Status</th><th>Signed</th><th>Pack id</th>\
         <th>Files</th></tr></thead>\n<tbody>\n",
        escape(name),
        escape(folder)
    );
    for r in packs {
        s.push_str(&row(r));
    }
    s.push_str("</tbody>\n</table>\n</section>\n");
    s
}

fn row(r: &Row) -> String {
    let mut signed: Vec<String> = r
        .signers
        .iter()
        .map(|(who, at)| format!("<li>{} <small>{}</small></li>", escape(who), escape(at)))
        .collect();
    if let Some((who, at)) = &r.finalised {
        signed.push(format!(
            "<li>finalised by {} <small>{}</small></li>",
            escape(who),
            escape(at)
        ));
    }
    let signed = if signed.is_empty() {
        "none".to_string()
    } else {
        format!("<ul>{}</ul>", signed.join(""))
    };
    let pdf = if r.status == "final" {
        super::FINAL_PDF
    } else {
        "pack.pdf"
    };
    let link =
        |file: &str, text: &str| format!("<a href=\"{}/{}\">{text}</a>", href(&r.path), href(file));
    format!(
        "<tr data-pack=\"{}\"><td>{}</td><td>r{}</td><td class=\"status status-{}\">{}</td><td>{signed}</td>\
         <td><code class=\"id\">{}</code></td><td>{} · {} · {}</td></tr>\n",
        escape(&r.path),
        escape(&r.as_of),
        r.revision,
        escape(&r.status),
        escape(&r.status),
        escape(&r.pack_id),
        link(pdf, "PDF"),
        link("summary.txt", "summary"),
        link(super::MANIFEST, "manifest"),
    )
}

/// Text for HTML content and quoted attributes.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A relative path for `href`: every byte outside the URL's unreserved characters and `/` percent-encoded
/// (RFC 3986 §2.1), so a folder name cannot end the attribute or start a scheme.
pub fn href(path: &str) -> String {
    let mut out = String::new();
    for b in path.bytes() {
        if b.is_ascii_alphanumeric() || b"-._~/".contains(&b) {
            out.push(b as char);
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markup_in_names_is_text_and_links_stay_relative() {
        // The five characters HTML gives meaning to in text and quoted attributes (HTML Living Standard,
        // "Escaping a string").
        assert_eq!(
            escape(r#"<b>"A" & 'B'</b>"#),
            "&lt;b&gt;&quot;A&quot; &amp; &#39;B&#39;&lt;/b&gt;"
        );
        // RFC 3986 §2.1: everything outside the unreserved set (and `/`) percent-encoded, so a folder
        // name cannot close the attribute or become a scheme.
        assert_eq!(href("a b/\"x\":y/r1"), "a%20b/%22x%22%3Ay/r1");
        assert_eq!(href("fund-é"), "fund-%C3%A9");
    }
}
