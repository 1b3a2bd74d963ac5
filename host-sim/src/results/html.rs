//! One self-contained HTML page for a review: tables, text and the pictures
//! inline as SVG, styled in the page itself, nothing fetched from anywhere.

use std::fmt::Write;

/// A part of the page.
#[derive(Clone, Debug, PartialEq)]
pub enum Section {
    /// A heading.
    Heading(String),
    /// A paragraph.
    Text(String),
    /// A table: the header cells and the rows.
    Table(Vec<String>, Vec<Vec<String>>),
    /// Preformatted text (the command's own table).
    Pre(String),
    /// A picture: its caption and the SVG document.
    Picture(String, String),
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The page.
pub fn page(title: &str, sections: &[Section]) -> String {
    let mut s = String::new();
    let _ = write!(
        s,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n<style>\n\
         body {{ font-family: sans-serif; margin: 2em auto; max-width: 1100px; color: #222; }}\n\
         h1 {{ font-size: 1.5em; }} h2 {{ font-size: 1.15em; margin-top: 1.6em; border-bottom: 1px solid #ccc; }}\n\
         table {{ border-collapse: collapse; margin: 0.6em 0; }}\n\
         th, td {{ border: 1px solid #ccc; padding: 0.25em 0.6em; text-align: right; }}\n\
         th {{ background: #f2f2f2; }} td:first-child, th:first-child, td.w {{ text-align: left; }}\n\
         pre {{ background: #f7f7f7; padding: 0.8em; overflow-x: auto; font-size: 0.85em; }}\n\
         figure {{ margin: 1em 0; }} figcaption {{ color: #555; font-size: 0.9em; }}\n\
         svg {{ max-width: 100%; height: auto; }}\n</style>\n</head>\n<body>\n<h1>{}</h1>\n",
        esc(title),
        esc(title)
    );
    for sec in sections {
        match sec {
            Section::Heading(h) => {
                let _ = writeln!(s, "<h2>{}</h2>", esc(h));
            }
            Section::Text(t) => {
                let _ = writeln!(s, "<p>{}</p>", esc(t));
            }
            Section::Table(head, rows) => {
                let _ = write!(s, "<table>\n<tr>");
                for h in head {
                    let _ = write!(s, "<th>{}</th>", esc(h));
                }
                let _ = writeln!(s, "</tr>");
                for r in rows {
                    let _ = write!(s, "<tr>");
                    for c in r {
                        // Numbers line up on the right, words read from the left.
                        let numeric = c == "-" || c.trim().parse::<f64>().is_ok();
                        let class = if numeric { "" } else { " class=\"w\"" };
                        let _ = write!(s, "<td{class}>{}</td>", esc(c));
                    }
                    let _ = writeln!(s, "</tr>");
                }
                let _ = writeln!(s, "</table>");
            }
            Section::Pre(t) => {
                let _ = writeln!(s, "<pre>{}</pre>", esc(t));
            }
            Section::Picture(caption, svg) => {
                // The document inline, without its XML-less header line break.
                let _ = writeln!(
                    s,
                    "<figure>\n{}\n<figcaption>{}</figcaption>\n</figure>",
                    svg.trim(),
                    esc(caption)
                );
            }
        }
    }
    let _ = writeln!(s, "</body>\n</html>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_page_is_self_contained_and_escapes_text() {
        let p = page(
            "a <b> & c",
            &[
                Section::Table(vec!["x".into()], vec![vec!["1 < 2".into()], vec!["2.5".into()]]),
                Section::Picture(
                    "fig".into(),
                    "<svg xmlns=\"http://www.w3.org/2000/svg\"></svg>".into(),
                ),
            ],
        );
        assert!(p.contains("<title>a &lt;b&gt; &amp; c</title>"));
        assert!(p.contains("<td class=\"w\">1 &lt; 2</td>"), "words left");
        assert!(p.contains("<td>2.5</td>"), "numbers right");
        assert!(p.contains("<svg xmlns"));
        // Nothing loaded from elsewhere: no script, link, image or url().
        for outside in ["<script", "<link", "<img", "url(", "@import"] {
            assert!(!p.contains(outside), "{outside}");
        }
    }
}
