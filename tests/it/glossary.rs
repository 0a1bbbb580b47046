//! Every label a template shows is listed in the glossary of DEVELOPERS.md ("## Glossary"),
//! found by the rule written there ("How labels are found"), which this file implements.

use pilot_ledger::domain::{DriverKind, Method, RankBy, ValueBasis};
use std::collections::BTreeSet;
use std::path::Path;

/// The elements whose text is a label.
const ELEMENTS: [&str; 9] = ["th", "dt", "label", "legend", "caption", "h2", "h3", "button", "option"];
/// Stand-ins for a cut `{{ expression }}` and a cut `{% tag %}`.
const VALUE: char = '\u{1}';
const CONTROL: char = '\u{2}';

/// `s` with every `open ... close` span replaced by `with` (removed when `None`).
fn replace_spans(s: &str, open: &str, close: &str, with: Option<char>) -> String {
    let mut out = String::with_capacity(s.len());
    let mut rest = s;
    while let Some(i) = rest.find(open) {
        out.push_str(&rest[..i]);
        let after = &rest[i + open.len()..];
        let Some(j) = after.find(close) else {
            rest = "";
            break;
        };
        out.extend(with);
        rest = &after[j + close.len()..];
    }
    out.push_str(rest);
    out
}

/// The label in an element's inner text (or a label argument), by the rule of DEVELOPERS.md;
/// `None` when it shows data only.
pub fn label_of(inner: &str) -> Option<String> {
    let mut text = String::new();
    let mut in_tag = false;
    for c in inner.chars() {
        match c {
            '<' => in_tag = true,
            '>' if in_tag => in_tag = false,
            _ if !in_tag => text.push(c),
            _ => {}
        }
    }
    if let Some(k) = text.find([VALUE, CONTROL]) {
        let value = text[k..].starts_with(VALUE);
        text.truncate(k);
        if value {
            // A word touching the expression is part of what it shows (`v{{ n }}`).
            let keep = text.trim_end_matches(|c: char| !c.is_whitespace()).len();
            text.truncate(keep);
        }
    }
    if let Some(k) = text.find(':') {
        text.truncate(k);
    }
    if text.matches('(').count() > text.matches(')').count()
        && let Some(k) = text.rfind('(')
    {
        text.truncate(k);
    }
    let text = text.split_whitespace().collect::<Vec<_>>().join(" ");
    let text = text.replace("&lt;", "<").replace("&gt;", ">").replace("&#39;", "'").replace("&amp;", "&");
    (!text.is_empty()).then_some(text)
}

/// The arguments of a call whose `(` is at the start of `s`, split at top-level commas.
fn call_arguments(s: &str) -> Vec<String> {
    let (mut depth, mut quoted, mut escaped) = (0, false, false);
    let (mut out, mut current) = (Vec::new(), String::new());
    for c in s.chars() {
        if quoted {
            current.push(c);
            match (escaped, c) {
                (true, _) => escaped = false,
                (false, '\\') => escaped = true,
                (false, '"') => quoted = false,
                _ => {}
            }
            continue;
        }
        match c {
            '"' => {
                quoted = true;
                current.push(c);
            }
            '(' => {
                depth += 1;
                if depth > 1 {
                    current.push(c);
                }
            }
            ')' => {
                depth -= 1;
                if depth == 0 {
                    out.push(current.trim().to_string());
                    return out;
                }
                current.push(c);
            }
            ',' if depth == 1 => out.push(std::mem::take(&mut current).trim().to_string()),
            _ => current.push(c),
        }
    }
    out
}

/// Every label of one template's text, in the order found (fields, then element by element).
pub fn labels_in(template: &str) -> Vec<String> {
    let text = replace_spans(template, "{#", "#}", None);
    let mut labels = Vec::new();
    // The label argument (the third) of `m::field(...)`, when it is a string literal.
    for (i, _) in text.match_indices("m::field(") {
        let args = call_arguments(&text[i + "m::field".len()..]);
        if let Some(l) = args.get(2).and_then(|a| a.strip_prefix('"')).and_then(|a| a.strip_suffix('"')) {
            labels.extend(label_of(l));
        }
    }
    let text = replace_spans(&text, "{{", "}}", Some(VALUE));
    let text = replace_spans(&text, "{%", "%}", Some(CONTROL));
    for name in ELEMENTS {
        let (open, close) = (format!("<{name}"), format!("</{name}>"));
        let mut rest = text.as_str();
        while let Some(i) = rest.find(&open) {
            let after = &rest[i + open.len()..];
            // `<th` must not match `<thead`.
            if !after.starts_with([' ', '>', '\n']) {
                rest = after;
                continue;
            }
            let Some(start) = after.find('>') else { break };
            let Some(end) = after[start..].find(&close) else { break };
            labels.extend(label_of(&after[start + 1..start + end]));
            rest = &after[start + end..];
        }
    }
    labels
}

/// The page labels the glossary lists: the quoted words of the "page label" column of the
/// glossary table and of the "words" column of "Other page words" (the second column of both),
/// lower-cased.
pub fn glossary_labels(developers_md: &str) -> BTreeSet<String> {
    let start = developers_md.find("\n## Glossary").unwrap_or(developers_md.len());
    let section = &developers_md[start..];
    let end = section[1..].find("\n## ").map_or(section.len(), |e| e + 1);
    let mut listed = BTreeSet::new();
    for line in section[..end].lines().filter(|l| l.starts_with('|')) {
        let Some(cell) = line.split('|').nth(2) else { continue };
        listed.extend(cell.split('"').skip(1).step_by(2).map(str::to_lowercase));
    }
    listed
}

/// The labels of `found` the glossary does not list.
pub fn unlisted(listed: &BTreeSet<String>, found: &[String]) -> Vec<String> {
    found.iter().filter(|l| !listed.contains(&l.to_lowercase())).cloned().collect()
}

fn templates(dir: &Path, out: &mut Vec<(String, String)>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir).unwrap().map(|e| e.unwrap().path()).collect();
    entries.sort();
    for path in entries {
        if path.is_dir() {
            templates(&path, out);
        } else if path.extension().is_some_and(|e| e == "html") {
            out.push((path.display().to_string(), std::fs::read_to_string(&path).unwrap()));
        }
    }
}

fn developers_md() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("DEVELOPERS.md")).unwrap()
}

#[test]
fn every_label_a_page_shows_is_in_the_glossary() {
    let listed = glossary_labels(&developers_md());
    let mut files = Vec::new();
    templates(&Path::new(env!("CARGO_MANIFEST_DIR")).join("templates"), &mut files);
    assert!(files.len() > 20, "the templates were found: {}", files.len());
    let mut missing = Vec::new();
    let mut found = 0;
    for (file, text) in &files {
        let labels = labels_in(text);
        found += labels.len();
        missing.extend(unlisted(&listed, &labels).into_iter().map(|l| format!("{file}: {l:?}")));
    }
    assert!(found > 200, "the rule finds the pages' labels: {found}");
    // The words the code writes into select boxes and cells.
    let mut written: Vec<String> = RankBy::ALL.iter().map(|r| r.label().to_string()).collect();
    written.extend(ValueBasis::ALL.iter().map(|b| b.label().to_string()));
    written.extend(DriverKind::ALL.iter().map(|k| k.label().to_string()));
    written.extend([Method::Direct, Method::VolumeAdjusted, Method::Spend].map(|m| m.label().to_string()));
    missing.extend(unlisted(&listed, &written).into_iter().map(|l| format!("code: {l:?}")));
    assert!(missing.is_empty(), "labels the glossary of DEVELOPERS.md does not list:\n{}", missing.join("\n"));
}

/// Positive and negative controls of the extraction: what the rule takes from each element.
#[test]
fn the_rule_takes_the_fixed_words_of_each_label() {
    let t = r#"{# <th>Commented out</th> #}<table><thead><tr><th scope="col">NPV ({{ site.currency }})</th>
        <th>{{ r.name }}</th><th><a href="/cases/{{ id }}">v{{ n }} {{ label }}</a></th></tr></thead>
        <tbody><tr><td>Not a label</td></tr></tbody></table>
        <dt>Chance-weighted NPV (chance the pilot works: {{ u.p }})</dt>
        <dt>Realized XNPV at the hurdle rate{% if x %} at approval ({{ r }}){% endif %}</dt>
        <label for="e">Evidence: how it was measured</label><label class="sr" for="w">Reason for reversing entry {{ id }}</label>
        <option value="x"{% if a > b %} selected{% endif %}>direct: avoided quantity</option>
        <button type="submit" class="small" aria-label="Remove {{ l }}">Remove</button>
        <h2 id="t">Realized to date ({{ f.elapsed }} months booked)</h2><p>Not a label either</p>
        {% call m::field("s", "s", "Chance the pilot works", h.s, "%", "0 to 100", e.get("s")) %}{% endcall %}
        {% call m::field(format!("w_{}", c.key), format!("w_{}", c.key), c.label, c.weight, "", "", None) %}{% endcall %}"#;
    let mut got = labels_in(t);
    got.sort();
    let mut want = [
        "Chance the pilot works",
        "NPV",
        "Chance-weighted NPV",
        "Realized XNPV at the hurdle rate",
        "Evidence",
        "Reason for reversing entry",
        "direct",
        "Remove",
        "Realized to date",
    ]
    .map(String::from);
    want.sort();
    assert_eq!(got, want);
}

/// A label the glossary lists passes; invented ones, and the old words it replaced, fail.
#[test]
fn a_listed_label_passes_and_an_unlisted_one_fails() {
    let listed = glossary_labels(&developers_md());
    let known = ["Chance NPV is below zero", "10th pct. / median / 90th pct.", "taken by profitability index"];
    assert_eq!(unlisted(&listed, &known.map(String::from)), Vec::<String>::new());
    assert_eq!(unlisted(&listed, &["Sign in".to_string()]), Vec::<String>::new(), "other page words count");
    let unknown = ["Quantum flux yield", "P(NPV < 0)", "P10 / P50 / P90", "in PI order", "Risk-adjusted NPV"];
    assert_eq!(unlisted(&listed, &unknown.map(String::from)), unknown.map(String::from));
    // A template with one listed and one invented label names only the invented one.
    let page = "<th>Payback</th><th>Payback wobble</th>";
    assert_eq!(unlisted(&listed, &labels_in(page)), ["Payback wobble"]);
}

/// The pages write percentiles in words, with the convention beside them, and none of the
/// replaced words (the demo plant's portfolio and one of its case pages).
#[tokio::test]
async fn pages_write_percentiles_from_the_low_end_beside_their_convention() {
    let t = crate::helpers::test_app(true).await;
    let note = "Percentiles count from the low end: 1 in 10 simulated outcomes falls below the 10th percentile.";
    let portfolio = t.get("/portfolio").await;
    assert_eq!(portfolio.status, axum::http::StatusCode::OK);
    assert!(portfolio.text.contains(note), "{}", portfolio.text);
    for label in [
        "<th scope=\"col\" class=\"range\">NPV: 10th pct. / median / 90th pct.</th>",
        "<th scope=\"col\" class=\"num\">Chance NPV is below zero</th>",
        "<th scope=\"col\" class=\"num\">Chance-weighted NPV</th>",
        "<th scope=\"col\" class=\"num\">Profitability index</th>",
    ] {
        assert!(portfolio.text.contains(label), "{label}");
    }
    let api = t.get("/api/v1/portfolio").await.json();
    let paint = api["zones"].as_array().unwrap().iter().find(|z| z["code"] == "PAINT-1").unwrap();
    let case = t.get(&format!("/cases/{}", paint["case"]["id"])).await;
    assert_eq!(case.status, axum::http::StatusCode::OK);
    assert!(case.text.contains(note), "{}", case.text);
    for label in ["<dt>10th percentile</dt>", "<dt>50th percentile (median)</dt>", "<dt>90th percentile</dt>"] {
        assert!(case.text.contains(label), "{label}");
    }
    for old in ["P10", "P50", "P90", "P(NPV", "PI order", "Risk-adjusted", "risk-adjusted", "technical success", ">PI<"]
    {
        assert!(!portfolio.text.contains(old), "portfolio page: {old}");
        assert!(!case.text.contains(old), "case page: {old}");
    }
}
