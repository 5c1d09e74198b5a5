use super::*;

/// Every character half an em wide: easy to reason about.
struct Mono;

impl Measure for Mono {
    fn width(&self, text: &str, size: f32, _bold: bool) -> f32 {
        text.chars().count() as f32 * size * 0.5
    }
}

const M: Margins = Margins {
    top: 50.0,
    right: 50.0,
    bottom: 50.0,
    left: 50.0,
};

#[test]
fn wrapping_at_spaces_and_inside_long_words() {
    let s = Style::new(10.0); // 5 pt a character
    assert_eq!(wrap(&Mono, "aa bb cc", s, 25.0), vec!["aa bb", "cc"]);
    assert_eq!(
        wrap(&Mono, "abcdefghijkl", s, 25.0),
        vec!["abcde", "fghij", "kl"]
    );
    assert_eq!(wrap(&Mono, "", s, 25.0), vec![""]);
    assert_eq!(wrap(&Mono, "one\ntwo", s, 100.0), vec!["one", "two"]);
    for line in wrap(
        &Mono,
        "the quick brown fox jumps over the lazy dog",
        s,
        42.0,
    ) {
        assert!(Mono.width(&line, 10.0, false) <= 42.0, "{line}");
    }
}

#[test]
fn paragraphs_break_across_pages_between_lines() {
    let mut f = Flow::new(&Mono, 300.0, 200.0, M);
    // 100 pt of body height, 12.5 pt a line: 8 lines a page.
    f.paragraph(&"word ".repeat(200), Style::new(10.0), 0.0);
    let pages = f.finish();
    assert!(pages.len() > 1);
    for p in &pages {
        for it in &p.items {
            if let Item::Text { y, .. } = it {
                assert!(*y <= 150.0 && *y >= 50.0, "baseline {y} outside the body");
            }
        }
    }
}

fn table(rows: usize) -> Table {
    Table {
        columns: vec![
            Column {
                title: "id".into(),
                width: 60.0,
                align: Align::Left,
            },
            Column {
                title: "value".into(),
                width: 80.0,
                align: Align::Decimal,
            },
        ],
        show_header: true,
        header: Style::new(8.0).bold(),
        body: Style::new(8.0),
        rows: (0..rows)
            .map(|i| Row {
                cells: vec![
                    Cell::Text(if i % 7 == 0 {
                        format!("row {i} with a longer label that wraps")
                    } else {
                        format!("row {i}")
                    }),
                    Cell::Text(["1.5", "25.0", "< 0.600", "2530", "0.0451"][i % 5].to_string()),
                ],
                rule_above: false,
            })
            .collect(),
    }
}

fn texts(p: &Page) -> Vec<(f32, f32, String)> {
    p.items
        .iter()
        .filter_map(|i| match i {
            Item::Text { x, y, text, .. } => Some((*x, *y, text.clone())),
            _ => None,
        })
        .collect()
}

#[test]
fn table_header_repeats_and_rows_stay_whole() {
    let mut f = Flow::new(&Mono, 300.0, 300.0, M);
    f.table(&table(60));
    let pages = f.finish();
    assert!(pages.len() >= 3, "{} pages", pages.len());
    for (n, p) in pages.iter().enumerate() {
        let t = texts(p);
        assert!(
            t.iter().any(|(_, _, s)| s == "id") && t.iter().any(|(_, _, s)| s == "value"),
            "no header on page {n}"
        );
        for (_, y, _) in &t {
            assert!(*y <= 250.0, "text below the bottom margin on page {n}");
        }
    }
    // No row is split: the first label under each page's header starts a
    // row, never continues one, and every row appears exactly once.
    let mut seen = std::collections::HashSet::new();
    for (n, p) in pages.iter().enumerate() {
        let t = texts(p);
        let labels: Vec<&String> = t
            .iter()
            .filter(|(x, _, s)| *x == 50.0 + CELL_PAD && s != "id")
            .map(|(_, _, s)| s)
            .collect();
        assert!(
            labels[0].starts_with("row "),
            "page {n} starts with {:?}",
            labels[0]
        );
        for s in labels.iter().filter(|s| s.starts_with("row ")) {
            assert!(
                seen.insert(s.split_whitespace().nth(1).unwrap().to_string()),
                "{s} twice"
            );
        }
    }
    assert_eq!(seen.len(), 60);
}

#[test]
fn decimal_points_line_up() {
    let mut f = Flow::new(&Mono, 300.0, 800.0, M);
    f.table(&table(5));
    let p = &f.finish()[0];
    // x of the '.' in each number = x of the text + width of the part before it.
    let mut points = Vec::new();
    let mut ends_without_point = Vec::new();
    for (x, _, s) in texts(p) {
        if ["1.5", "25.0", "< 0.600", "0.0451"].contains(&s.as_str()) {
            let before = &s[..s.rfind('.').unwrap()];
            points.push(x + Mono.width(before, 8.0, false));
        }
        if s == "2530" {
            ends_without_point.push(x + Mono.width(&s, 8.0, false));
        }
    }
    assert_eq!(points.len(), 4);
    for p in &points {
        assert!((p - points[0]).abs() < 1e-3, "{points:?}");
    }
    // A whole number ends where the others' points are.
    assert!((ends_without_point[0] - points[0]).abs() < 1e-3);
}
