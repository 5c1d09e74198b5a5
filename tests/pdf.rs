//! Certificates checked through an independent reader: poppler's pdftotext
//! (installed by .ci/run).

mod util;
use std::process::Command;
use util::TestDir;

/// The text of each page, as pdftotext lays it out.
fn pages(path: &std::path::Path) -> Vec<String> {
    let out = Command::new("pdftotext")
        .args(["-layout", "-enc", "UTF-8"])
        .arg(path)
        .arg("-")
        .output()
        .expect("pdftotext (poppler-utils) must be installed to check certificates");
    assert!(
        out.status.success(),
        "pdftotext failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let mut pages: Vec<String> = text.split('\x0c').map(String::from).collect();
    if pages.last().is_some_and(|p| p.trim().is_empty()) {
        pages.pop();
    }
    pages
}

fn demo(t: &TestDir) {
    let r = t.limen(&["demo", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
}

#[test]
fn every_page_names_the_report_revision_and_page_of_n() {
    let t = TestDir::new("pdf-pages");
    demo(&t);
    for report in ["COA-2611-041", "COA-2611-052"] {
        let p = pages(&t.path(&format!("out/reports/{report}.pdf")));
        let n = p.len();
        assert!(n >= 1);
        for (i, page) in p.iter().enumerate() {
            assert!(
                page.contains(&format!("Report {report} · Revision 0")),
                "page {} of {report}",
                i + 1
            );
            assert!(
                page.contains(&format!("Page {} of {n}", i + 1)),
                "page {} of {report}",
                i + 1
            );
        }
        assert!(p[n - 1].contains("End of report"));
        assert!(!p[0].contains("End of report") || n == 1);
    }
}

#[test]
fn every_result_appears_with_the_trade_characters() {
    let t = TestDir::new("pdf-results");
    demo(&t);
    let csv = t.read("out/reports/COA-2611-052.csv");
    let text = pages(&t.path("out/reports/COA-2611-052.pdf")).join("\n");
    for line in csv.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        let (lab_id, reported) = (cells[2], cells[cells.len() - 13]);
        assert!(text.contains(lab_id), "{lab_id} missing");
        assert!(text.contains(reported), "{lab_id}: {reported} missing");
    }
    assert!(text.contains("µg/L"), "µ must survive as µ");
    assert!(text.contains("≤ 20 %"), "≤ must survive as ≤");
    assert!(text.contains("Stoneware mug, speckled"));
    // Each limit applied is listed as published, with its source.
    assert!(text.contains("0.5 µg/mL"), "{text}");
    assert!(text.contains("FDA CPG Sec. 545.450 (lead: cups and mugs)"));
}

#[test]
fn the_footnote_explains_only_the_states_present() {
    let t = TestDir::new("pdf-footnote");
    demo(&t);
    let furniture = pages(&t.path("out/reports/COA-2611-041.pdf")).join("\n");
    let ceramics = pages(&t.path("out/reports/COA-2611-052.pdf")).join("\n");
    for text in [&furniture, &ceramics] {
        assert!(text.contains("Not detected: the measured amount was below"));
        assert!(text.contains("Detected, below LOQ: the analyte is present"));
        assert!(text.contains("Quantified: the amount was at or above the LOQ"));
        assert!(!text.contains("Above range: the instrument reading"));
        assert!(text.contains("40 CFR Part 136 Appendix B"));
        assert!(text.contains("Cautions"));
    }
    // Only the furniture report has inconclusive results (P05's 12 mg chip).
    assert!(furniture.contains("Inconclusive: for P05 Pb, P05 Cd"));
    assert!(!ceramics.contains("Inconclusive: for"));
    // Under the guard band each quantified result carries U (k = 2): P01 Pb
    // 74.63 mg/kg × 12 % = 8.96, shown to 2 figures as 9.0.
    assert!(furniture.contains("± 9.0"), "{furniture}");
    let flat = |t: &str| t.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat(&furniture)
            .contains("expanded measurement uncertainty U, with a coverage factor k = 2")
    );
    assert!(!flat(&ceramics).contains("coverage factor k = 2"));
    // Guarded rule on one, simple on the other.
    assert!(furniture.contains("guard band equal to the expanded measurement uncertainty"));
    assert!(ceramics.contains("simple acceptance"));
    // Qualifier legend only where qualifiers are used.
    assert!(furniture.contains("B: the method blank contained the analyte"));
    assert!(!ceramics.contains("B: the method blank contained the analyte"));
}

#[test]
fn same_inputs_give_identical_bytes() {
    let t = TestDir::new("pdf-same");
    // Separate copies of the workspace: each has its own ledger, so the same
    // report can be issued in each.
    for w in ["ws1", "ws2", "ws3"] {
        t.demo_workspace(w);
    }
    let a = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws1/ceramics-2611-052",
        "--out",
        "a",
    ]);
    let b = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws2/ceramics-2611-052",
        "--out",
        "b",
    ]);
    assert_eq!((a.code, b.code), (0, 0), "{}{}", a.stderr, b.stderr);
    let (pa, pb) = (
        std::fs::read(t.path("a/COA-2611-052.pdf")).unwrap(),
        std::fs::read(t.path("b/COA-2611-052.pdf")).unwrap(),
    );
    assert_eq!(pa, pb);
    assert!(
        pa.len() < 100_000,
        "one-page certificate of {} bytes",
        pa.len()
    );
    // Two reports issued by one process are each reproducible too.
    let c = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws3/furniture-jewellery-2611-041",
        "ws3/ceramics-2611-052",
        "--out",
        "c",
    ]);
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert_eq!(std::fs::read(t.path("c/COA-2611-052.pdf")).unwrap(), pa);
}

#[test]
fn a_long_report_repeats_its_header_and_never_splits_a_row() {
    let t = TestDir::new("pdf-long");
    t.write(
        "ws/lab.toml",
        "name='Long Lab'\naddress='1 Road'\nsignatory='S'\n[qc]\nrequired=[]\n",
    );
    t.write("ws/limits.csv", "analyte,matrix,method,unit,mdl,loq,effective_from,study_id\nPb,paint,6010D,ug/L,8,25,2025-01-01,S1\n");
    t.write("ws/specs.csv", "spec,analyte,matrix,limit,unit,citation,effective_from\nP,Pb,paint,90,mg/kg,c,2009-01-01\n");
    t.write("ws/b/batch.toml", "batch='L'\nreport='LONG-1'\nclient_name='C'\nclient_address='A'\nclient_contact='P'\nreceived_on=2026-11-10\nresults='r.csv'\n");
    let mut csv = String::from(
        "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec\n",
    );
    for i in 0..300 {
        csv.push_str(&format!(
            "S{i:04},C{i:04},Painted test panel from lot tail{i:04},sample,Pb,paint,6010D,{}.{},ug/L,1,0.100,50,2026-11-13,P\n",
            10 + i % 300,
            i % 10
        ));
    }
    t.write("ws/b/r.csv", csv);
    t.signing_key("ws", "default");
    let r = t.limen(&["issue", "ws/b", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let p = pages(&t.path("out/LONG-1.pdf"));
    assert!(p.len() >= 10, "{} pages", p.len());
    let page_of = |needle: &str| p.iter().position(|pg| pg.contains(needle));
    for i in 0..300 {
        let id = format!("S{i:04}");
        let at = page_of(&id).unwrap_or_else(|| panic!("{id} missing"));
        // The wrapped second line of the row's description is on the same page.
        assert_eq!(
            page_of(&format!("tail{i:04}")),
            Some(at),
            "{id} split across pages"
        );
        assert!(
            p[at].contains("Lab ID") && p[at].contains("Verdict"),
            "no table header on page {}",
            at + 1
        );
    }
}

#[test]
fn characters_the_font_lacks_are_reported() {
    let t = TestDir::new("pdf-glyph");
    t.demo_workspace("ws");
    let batch = t
        .read("ws/ceramics-2611-052/batch.toml")
        .replace("Marlow & Finch Home Imports Ltd", "Marlow & Finch 铅 Ltd");
    t.write("ws/ceramics-2611-052/batch.toml", batch);
    let r = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws/ceramics-2611-052",
        "--out",
        "out",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stderr
            .contains("warning: COA-2611-052: the certificate font has no glyph for '铅' (U+94C5)"),
        "{}",
        r.stderr
    );
}

#[test]
fn a_workspace_template_changes_the_wording() {
    let t = TestDir::new("pdf-template");
    t.demo_workspace("ws");
    t.write("ws/templates/title.hbs", "Test Report for {{client_name}}");
    let r = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws/ceramics-2611-052",
        "--out",
        "out",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        pages(&t.path("out/COA-2611-052.pdf"))[0]
            .contains("Test Report for Marlow & Finch Home Imports Ltd")
    );
    t.demo_workspace("ws2");
    t.write("ws2/templates/title.hbs", "Report for {{client}}");
    let r = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws2/ceramics-2611-052",
        "--out",
        "out2",
    ]);
    assert_eq!(r.code, 2, "a missing variable is an error in strict mode");
    assert!(r.stderr.contains("title.hbs"), "{}", r.stderr);
    assert!(
        !t.exists("out2/COA-2611-052.csv"),
        "nothing is written when the certificate fails"
    );
}

#[test]
fn page_size_comes_from_lab_toml() {
    let t = TestDir::new("pdf-letter");
    t.demo_workspace("ws");
    let lab = t
        .read("ws/lab.toml")
        .replace("page_size = \"A4\"", "page_size = \"Letter\"");
    t.write("ws/lab.toml", lab);
    let r = t.limen(&[
        "issue",
        "--by",
        "ivale",
        "ws/ceramics-2611-052",
        "--out",
        "out",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let info = Command::new("pdfinfo")
        .arg(t.path("out/COA-2611-052.pdf"))
        .output()
        .expect("pdfinfo");
    let info = String::from_utf8_lossy(&info.stdout);
    assert!(info.contains("612 x 792 pts (letter)"), "{info}");
    assert!(
        info.contains("Title:           COA-2611-052 revision 0"),
        "{info}"
    );
    assert!(
        info.contains("Author:          Kestrel Bay Analytical Laboratory"),
        "{info}"
    );
}

/// The words of the results tables (from the "Results" heading to the strip
/// legend), without the running header and footer of each page.
fn results_words(pages: &[String]) -> Vec<String> {
    let mut words = Vec::new();
    let mut inside = false;
    for page in pages {
        for line in page.lines() {
            let t = line.trim();
            if !inside && t == "Results" {
                inside = true;
                continue;
            }
            if inside && t.starts_with("Strip:") {
                return words;
            }
            let running = t.contains("Verification code")
                || t.contains("Page ")
                || t.starts_with("Kestrel Bay")
                || t.starts_with("Unit 7")
                || t.starts_with("ISO/IEC");
            if inside && !running {
                words.extend(t.split_whitespace().map(String::from));
            }
        }
    }
    words
}

#[test]
fn every_number_in_the_results_table_is_in_the_csv() {
    let t = TestDir::new("pdf-numbers-in-csv");
    demo(&t);
    for report in ["COA-2611-041", "COA-2611-052"] {
        let csv = t.read(&format!("out/reports/{report}.csv"));
        let mut r = csv::Reader::from_reader(csv.as_bytes());
        let mut cells = std::collections::HashSet::new();
        for rec in r.records() {
            for cell in rec.unwrap().iter() {
                cells.insert(cell.to_string());
                cells.extend(cell.split_whitespace().map(String::from));
            }
        }
        let words = results_words(&pages(&t.path(&format!("out/reports/{report}.pdf"))));
        let numbers: Vec<&String> = words
            .iter()
            .filter(|w| w.parse::<rust_decimal::Decimal>().is_ok())
            .collect();
        assert!(numbers.len() > 50, "{report}: {numbers:?}");
        for n in numbers {
            assert!(
                cells.contains(n),
                "{report}: {n} is printed but not in the CSV"
            );
        }
        // And the other way: each U in the CSV is printed under its result.
        let text = words.join(" ");
        for u in util::csv_column(&csv, "uncertainty") {
            if !u.is_empty() {
                assert!(text.contains(&format!("± {u}")), "{report}: U {u}");
            }
        }
    }
}

#[test]
fn the_footnote_states_the_detection_power_of_a_weak_pass_in_numbers() {
    let t = TestDir::new("pdf-power");
    demo(&t);
    let csv = t.read("out/reports/COA-2611-041.csv");
    let p09 = util::csv_row(&csv, "P09", "Cd");
    let beta: f64 = p09["beta_at_limit"].parse().unwrap();
    let text = pages(&t.path("out/reports/COA-2611-041.pdf")).join(" ");
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    let sentence = format!(
        "P09 Cd: if the item contained Cd at exactly the limit (75 mg/kg), this test would have missed it about {} times in 100 (β = {})",
        (beta * 100.0).round(),
        p09["beta_at_limit"]
    );
    assert!(flat.contains(&sentence), "{flat}");
    assert!(
        flat.contains(&format!("from about {} mg/kg", p09["ld"])),
        "{flat}"
    );
    assert!(flat.contains("P: pass with low detection power"), "{flat}");
    // The ceramics report has no weak pass: one sentence, no list.
    let text = pages(&t.path("out/reports/COA-2611-052.pdf")).join(" ");
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains("an item at the limit would have been found at least 99 times in 100"),
        "{flat}"
    );
    assert!(!flat.contains("P: pass with low detection power"));
}
