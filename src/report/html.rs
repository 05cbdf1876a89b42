//! Building blocks of provisio's HTML pages: escaping, one shared
//! stylesheet and script, tables, and the page shell. Pages are single
//! files that work offline: no external script, font, style or image.

/// Escapes text for HTML element content and quoted attribute values.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
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

/// Standard base64 (RFC 4648) with padding.
pub fn base64(bytes: &[u8]) -> String {
    const A: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for k in 0..4 {
            if k <= chunk.len() {
                out.push(A[(n >> (18 - 6 * k) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// The stylesheet shared by every page.
pub const STYLE: &str = r#"
:root{--ink:#1f2933;--muted:#5f6b7a;--line:#dde2e7;--paper:#fbfaf7;--card:#ffffff;
--accent:#1b5e8c;--fc:#007a5e;--fit:#1e6b3a;--fit-bg:#e2f1e7;--care:#8a5a00;--care-bg:#fbefd2;
--bad:#a3261b;--bad-bg:#f9e0dd}
*{box-sizing:border-box}
html{background:var(--paper);color:var(--ink);font:15px/1.5 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif}
body{margin:0;overflow-wrap:break-word}
main{max-width:1240px;margin:0 auto;padding:0 20px 48px}
header.top{background:var(--ink);color:#fff;padding:22px 20px 18px}
header.top .inner{max-width:1240px;margin:0 auto}
header.top h1{margin:0;font-size:26px;font-weight:650;letter-spacing:.01em}
header.top p{margin:4px 0 0;color:#c9d2dc}
nav.jump{position:sticky;top:0;z-index:5;background:rgba(251,250,247,.96);border-bottom:1px solid var(--line)}
nav.jump .inner{max-width:1240px;margin:0 auto;padding:8px 20px;display:flex;gap:18px;flex-wrap:wrap}
nav.jump a{color:var(--accent);text-decoration:none;font-weight:600}
nav.jump a:hover{text-decoration:underline}
h2{font-size:21px;margin:34px 0 10px;padding-bottom:6px;border-bottom:2px solid var(--ink)}
[id]{scroll-margin-top:64px}
h3{font-size:16px;margin:22px 0 8px}
a{color:var(--accent)}
.caution{border:2px solid var(--care);background:var(--care-bg);padding:12px 16px;margin:20px 0;border-radius:6px}
.caution strong{color:var(--care)}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:4px 18px;margin:8px 0}
dl.facts dt{color:var(--muted)}
dl.facts dd{margin:0;overflow-wrap:anywhere}
code,.mono{font-family:"DejaVu Sans Mono",Consolas,monospace;font-size:13px;overflow-wrap:anywhere}
.table-wrap{overflow-x:auto;background:var(--card);border:1px solid var(--line);border-radius:6px}
table{border-collapse:collapse;width:100%;font-size:14px}
th,td{padding:6px 10px;border-bottom:1px solid var(--line);text-align:left;vertical-align:top}
th{background:#f1f3f5;font-weight:650;min-width:4.5em}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
tbody tr:hover{background:#f6f8fa}
tr.chosen td{background:#e6f0f7;font-weight:600}
th button{all:unset;cursor:pointer}
th button::after{content:" \2195";color:var(--muted);font-size:11px}
th[aria-sort=ascending] button::after{content:" \25B2"}
th[aria-sort=descending] button::after{content:" \25BC"}
th button:focus-visible{outline:2px solid var(--accent)}
.pill{display:inline-block;padding:1px 9px;border-radius:999px;font-size:12.5px;font-weight:650;white-space:nowrap}
.pill.fit{background:var(--fit-bg);color:var(--fit)}
.pill.care{background:var(--care-bg);color:var(--care)}
.pill.bad{background:var(--bad-bg);color:var(--bad)}
.pill.none{background:#eceff2;color:var(--muted)}
section.product{background:var(--card);border:1px solid var(--line);border-left:6px solid var(--accent);
border-radius:6px;padding:4px 20px 18px;margin:26px 0}
section.product.fit{border-left-color:var(--fit)}
section.product.care{border-left-color:#d49a1c}
section.product.bad{border-left-color:var(--bad)}
section.product h2{border:0;margin:14px 0 4px;display:flex;gap:12px;align-items:baseline;flex-wrap:wrap}
.keys{display:flex;flex-wrap:wrap;gap:10px;margin:12px 0}
.key{border:1px solid var(--line);border-radius:6px;padding:6px 12px;min-width:150px;background:var(--paper)}
.key .v{font-size:19px;font-weight:650;font-variant-numeric:tabular-nums}
.key .l{font-size:12.5px;color:var(--muted)}
figure.chart{margin:12px 0;border:1px solid var(--line);border-radius:6px;overflow:hidden;background:#fff}
figure.chart svg{display:block;width:100%;height:auto}
figure.chart figcaption{font-size:13px;color:var(--muted);padding:6px 12px;border-top:1px solid var(--line)}
details{margin:8px 0}
summary{cursor:pointer;font-weight:600}
ul.warn{margin:6px 0;padding-left:20px}
ul.warn li{list-style:none;position:relative}
ul.warn li::before{content:"!";position:absolute;left:-20px;top:2px;width:14px;height:14px;border-radius:50%;
background:var(--care);color:#fff;font-size:10px;font-weight:700;text-align:center;line-height:14px}
p.note{color:var(--muted);font-size:13.5px}
footer{max-width:1240px;margin:0 auto;padding:18px 20px 40px;color:var(--muted);font-size:13px;border-top:1px solid var(--line)}
.attention{display:grid;grid-template-columns:repeat(auto-fit,minmax(340px,1fr));gap:14px}
.attention .list{background:var(--card);border:1px solid var(--line);border-radius:6px;padding:2px 16px 8px}
.attention ol{margin:6px 0;padding-left:22px}
.attention li{margin:3px 0}
.attention span.note{color:var(--muted);font-size:13px}
form.find{display:flex;flex-wrap:wrap;gap:16px;align-items:center;margin:8px 0}
form.find input[type=search]{font:inherit;padding:5px 10px;min-width:280px;border:1px solid var(--line);border-radius:6px}
form.find select{font:inherit;padding:4px}
button#index-more{font:inherit;padding:5px 14px;cursor:pointer}
@media (max-width:700px){
nav.jump .inner{flex-wrap:nowrap;overflow-x:auto;gap:14px;padding:8px 10px}
nav.jump a{white-space:nowrap}
header.top{padding:16px 10px 14px}
main{padding:0 6px 32px}
section.product{padding:4px 8px 14px;border-left-width:4px}
section.product figure.chart{margin-left:-8px;margin-right:-8px}
figure.chart{overflow-x:auto}
figure.chart>svg{min-width:840px}
section.product figure.chart svg{min-width:0}
.key{min-width:0;flex:1 1 140px}
form.find input[type=search]{min-width:0;width:100%}
.attention{grid-template-columns:1fr}
}
@media print{nav.jump{display:none}section.product{break-inside:avoid-page}}
"#;

/// The script shared by every page: click a column heading of a table with
/// class `sortable` to sort by it (numbers numerically, empty cells last).
pub const SCRIPT: &str = r#"
(function () {
  "use strict";
  function key(cell, numeric) {
    var v = cell.hasAttribute("data-v") ? cell.getAttribute("data-v") : cell.textContent.trim();
    if (v === "") { return null; }
    if (numeric) { var n = parseFloat(v); return isNaN(n) ? null : n; }
    return v.toLowerCase();
  }
  var tables = document.querySelectorAll("table.sortable");
  Array.prototype.forEach.call(tables, function (table) {
    if (!table.tHead || !table.tBodies.length) { return; }
    var heads = table.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads, function (th, col) {
      var button = document.createElement("button");
      button.type = "button";
      button.textContent = th.textContent;
      th.textContent = "";
      th.appendChild(button);
      button.addEventListener("click", function () {
        var ascending = th.getAttribute("aria-sort") !== "ascending";
        Array.prototype.forEach.call(heads, function (h) { h.removeAttribute("aria-sort"); });
        th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
        var numeric = th.classList.contains("num");
        var body = table.tBodies[0];
        var rows = Array.prototype.slice.call(body.rows);
        rows.sort(function (a, b) {
          var x = key(a.cells[col], numeric), y = key(b.cells[col], numeric);
          if (x === null && y === null) { return 0; }
          if (x === null) { return 1; }
          if (y === null) { return -1; }
          var c = x < y ? -1 : (x > y ? 1 : 0);
          return ascending ? c : -c;
        });
        rows.forEach(function (r) { body.appendChild(r); });
      });
    });
  });
  document.documentElement.setAttribute("data-script", "ran");
})();
"#;

/// The content security policy of a page whose only scripts are
/// `scripts` (each allowed by its SHA-256): nothing can be loaded.
fn policy(scripts: &[&str]) -> String {
    use sha2::Digest;
    let hashes: Vec<String> = scripts
        .iter()
        .map(|s| format!("'sha256-{}'", base64(&sha2::Sha256::digest(s.as_bytes()))))
        .collect();
    format!(
        "default-src 'none'; style-src 'unsafe-inline'; script-src {}; img-src data:",
        hashes.join(" ")
    )
}

/// The start of a page up to the opening `<body>`, allowing the report's
/// scripts ([`SCRIPT`] and the report's own).
pub fn page_start(title: &str) -> String {
    page_head(title, &[SCRIPT, crate::report::REPORT_SCRIPT])
}

fn page_head(title: &str, scripts: &[&str]) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
<meta http-equiv=\"Content-Security-Policy\" content=\"{}\">\n\
<title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        policy(scripts),
        escape(title)
    )
}

/// The given scripts as inline `<script>` elements.
pub fn page_scripts(scripts: &[&str]) -> String {
    scripts
        .iter()
        .map(|s| format!("<script>{s}</script>\n"))
        .collect()
}

/// The end of a page.
pub fn page_end() -> &'static str {
    "</body>\n</html>\n"
}

/// A whole page: `title` is text (escaped here); `body` is HTML built with
/// [`escape`]d text. A content security policy allows only the inline
/// stylesheet and this exact script, so the page cannot load anything.
pub fn page(title: &str, body: &str) -> String {
    format!(
        "{}{body}\n{}{}",
        page_head(title, &[SCRIPT]),
        page_scripts(&[SCRIPT]),
        page_end()
    )
}

/// How a column sorts and aligns.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Text, left-aligned.
    Text,
    /// Number, right-aligned, sorted numerically.
    Num,
}

/// One table cell: its HTML, and the value it sorts by.
#[derive(Debug, Clone, PartialEq)]
pub struct Cell {
    html: String,
    sort: Option<String>,
}

impl Cell {
    /// A text cell (escaped).
    pub fn text(s: &str) -> Cell {
        Cell {
            html: escape(s),
            sort: None,
        }
    }
    /// A cell of trusted HTML, sorted by `sort` (text).
    pub fn html(html: String, sort: &str) -> Cell {
        Cell {
            html,
            sort: Some(sort.to_string()),
        }
    }
    /// A number shown with `shown`, sorted by its value; empty when `None`.
    pub fn num(v: Option<f64>, shown: impl Fn(f64) -> String) -> Cell {
        match v.filter(|x| x.is_finite()) {
            Some(x) => Cell {
                html: escape(&shown(x)),
                sort: Some(format!("{x}")),
            },
            None => Cell {
                html: String::new(),
                sort: Some(String::new()),
            },
        }
    }
}

/// A table with a header row; `sortable` adds click-to-sort headings.
#[derive(Debug, Clone)]
pub struct Table {
    columns: Vec<(String, Kind)>,
    rows: Vec<(Option<&'static str>, Vec<Cell>)>,
    sortable: bool,
}

impl Table {
    /// A table with these columns.
    pub fn new(columns: &[(&str, Kind)], sortable: bool) -> Table {
        Table {
            columns: columns.iter().map(|(n, k)| (n.to_string(), *k)).collect(),
            rows: Vec::new(),
            sortable,
        }
    }
    /// Adds a row, optionally with a class (e.g. "chosen").
    pub fn row(&mut self, class: Option<&'static str>, cells: Vec<Cell>) {
        self.rows.push((class, cells));
    }
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.rows.len()
    }
    /// No rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }
    /// The table's HTML.
    pub fn html(&self) -> String {
        let mut s = String::from("<div class=\"table-wrap\"><table");
        if self.sortable {
            s.push_str(" class=\"sortable\"");
        }
        s.push_str("><thead><tr>");
        for (name, kind) in &self.columns {
            let class = if *kind == Kind::Num {
                " class=\"num\""
            } else {
                ""
            };
            s.push_str(&format!("<th scope=\"col\"{class}>{}</th>", escape(name)));
        }
        s.push_str("</tr></thead><tbody>\n");
        for (class, cells) in &self.rows {
            match class {
                Some(c) => s.push_str(&format!("<tr class=\"{c}\">")),
                None => s.push_str("<tr>"),
            }
            for (k, cell) in cells.iter().enumerate() {
                let num = self.columns.get(k).is_some_and(|c| c.1 == Kind::Num);
                s.push_str(if num { "<td class=\"num\"" } else { "<td" });
                if let Some(v) = &cell.sort {
                    s.push_str(&format!(" data-v=\"{}\"", escape(v)));
                }
                s.push('>');
                s.push_str(&cell.html);
                s.push_str("</td>");
            }
            s.push_str("</tr>\n");
        }
        s.push_str("</tbody></table></div>\n");
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_markup() {
        assert_eq!(
            escape("<script>alert(1)</script> & \"x\" 'y'"),
            "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;x&quot; &#39;y&#39;"
        );
    }

    #[test]
    fn base64_rfc4648_vectors() {
        // Test vectors of RFC 4648, section 10.
        for (i, o) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(i.as_bytes()), o, "{i}");
        }
    }

    #[test]
    fn table_cells_are_escaped_and_sortable() {
        let mut t = Table::new(&[("name", Kind::Text), ("n", Kind::Num)], true);
        t.row(
            None,
            vec![
                Cell::text("<b>"),
                Cell::num(Some(2.5), |x| format!("{x:.1}")),
            ],
        );
        let h = t.html();
        assert!(h.contains("<td>&lt;b&gt;</td>"), "{h}");
        assert!(
            h.contains("<td class=\"num\" data-v=\"2.5\">2.5</td>"),
            "{h}"
        );
        assert!(h.contains("class=\"sortable\""));
    }

    #[test]
    fn page_policy_names_the_script() {
        let p = page("a<b", "<p>x</p>");
        assert!(p.contains("<title>a&lt;b</title>"));
        use sha2::Digest;
        let h = base64(&sha2::Sha256::digest(SCRIPT.as_bytes()));
        assert!(p.contains(&format!("script-src 'sha256-{h}'")));
        assert_eq!(p.matches("<script>").count(), 1);
    }
}
