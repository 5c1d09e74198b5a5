//! Authorised release through the binary: signatories and their scopes,
//! the review step and its independence (ISO/IEC 17025:2017, 6.2.6 and
//! 7.8.1.1), on the demo workspace (two signatories: ivale, scope "*";
//! rokonjo, scope 6020B).

mod util;
use util::TestDir;

const CERAMICS: &str = "ws/ceramics-2611-052"; // 6020B only
const FURNITURE: &str = "ws/furniture-jewellery-2611-041"; // 6010D

fn demo(name: &str, review: Option<&str>) -> TestDir {
    let t = TestDir::new(name);
    t.demo_workspace("ws");
    if let Some(policy) = review {
        let lab = t.read("ws/lab.toml");
        t.write(
            "ws/lab.toml",
            lab.replacen("page_size", &format!("review = \"{policy}\"\npage_size"), 1),
        );
    }
    t
}

fn pdf_text(t: &TestDir, rel: &str) -> String {
    let out = std::process::Command::new("pdftotext")
        .args([t.path(rel).to_str().unwrap(), "-"])
        .output()
        .expect("pdftotext (poppler-utils) is installed");
    assert!(out.status.success());
    String::from_utf8_lossy(&out.stdout).replace('\n', " ")
}

#[test]
fn with_two_signatories_someone_must_be_named() {
    let t = demo("release-who", None);
    let r = t.limen(&["issue", CERAMICS, "--out", "out"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stderr.contains("say who authorises this release"),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr
            .contains("hint: pass --by ID, one of: ivale, rokonjo"),
        "{}",
        r.stderr
    );
    let r = t.limen(&["issue", CERAMICS, "--by", "nobody", "--out", "out"]);
    assert_eq!(r.code, 3);
    assert!(
        r.stderr.contains("`nobody` is not a signatory of this lab"),
        "{}",
        r.stderr
    );
    t.nothing_issued("COA-2611-052");
}

#[test]
fn a_signatory_authorises_only_within_scope() {
    let t = demo("release-scope", None);
    let r = t.limen(&["issue", FURNITURE, "--by", "rokonjo", "--out", "out"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stderr.contains("rokonjo may authorise 6020B, not 6010D/"),
        "{}",
        r.stderr
    );
    assert_eq!(
        std::fs::read_dir(t.path("out"))
            .map(|d| d.count())
            .unwrap_or(0),
        0
    );
    let r = t.limen(&["issue", CERAMICS, "--by", "rokonjo", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = pdf_text(&t, "out/COA-2611-052.pdf");
    assert!(
        text.contains("Authorised by Ruth Okonjo, Senior Analyst, ICP-MS"),
        "{text}"
    );
    assert!(!text.contains("Reviewed by"), "no review was recorded");
}

#[test]
fn a_required_review_must_be_of_the_current_inputs() {
    let t = demo("release-required", Some("required"));
    let r = t.limen(&["issue", CERAMICS, "--by", "ivale", "--out", "out"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stderr.contains("requires a review before release"),
        "{}",
        r.stderr
    );
    t.nothing_issued("COA-2611-052");

    let r = t.limen(&[
        "review",
        CERAMICS,
        "--by",
        "rokonjo",
        "--note",
        "QC and calculations checked",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("reviewed COA-2611-052"), "{}", r.stdout);
    // A changed input after the review voids it, and the refusal says which.
    let results = t.read("ws/ceramics-2611-052/leachates.csv");
    t.write("ws/ceramics-2611-052/leachates.csv", format!("{results}\n"));
    let r = t.limen(&["issue", CERAMICS, "--by", "ivale", "--out", "out"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stderr.contains("the review by Ruth Okonjo on 2026-11-18 was of other inputs (leachates.csv changed since)"),
        "{}",
        r.stderr
    );
    t.nothing_issued("COA-2611-052");

    let r = t.limen(&["review", CERAMICS, "--by", "rokonjo"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = t.limen(&["issue", CERAMICS, "--by", "ivale", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = pdf_text(&t, "out/COA-2611-052.pdf");
    assert!(
        text.contains("Reviewed by Ruth Okonjo, Senior Analyst, ICP-MS, on 2026-11-18."),
        "{text}"
    );
    assert!(text.contains("Authorised by Dr Imogen Vale"), "{text}");
    let h = t.limen(&["history", "COA-2611-052", "--workspace", "ws"]);
    assert!(h.stdout.contains("by Dr Imogen Vale"), "{}", h.stdout);
    assert!(
        h.stdout.contains("reviewed by Ruth Okonjo at 2026-11-18T"),
        "{}",
        h.stdout
    );
}

#[test]
fn an_independent_review_is_by_someone_else() {
    let t = demo("release-independent", Some("independent"));
    let r = t.limen(&["review", CERAMICS, "--by", "ivale"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = t.limen(&["issue", CERAMICS, "--by", "ivale", "--out", "out"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stderr
            .contains("the only review of these inputs is by ivale, who authorises"),
        "{}",
        r.stderr
    );
    t.nothing_issued("COA-2611-052");
    // Another signatory, in scope, may release on ivale's review.
    let r = t.limen(&["issue", CERAMICS, "--by", "rokonjo", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = pdf_text(&t, "out/COA-2611-052.pdf");
    assert!(text.contains("Reviewed by Dr Imogen Vale"), "{text}");
    assert!(text.contains("Authorised by Ruth Okonjo"), "{text}");
}

#[test]
fn a_reviewer_must_be_a_signatory() {
    let t = demo("release-reviewer", None);
    let r = t.limen(&["review", CERAMICS, "--by", "intern"]);
    assert_eq!(r.code, 3);
    assert!(
        r.stderr.contains("`intern` is not a signatory"),
        "{}",
        r.stderr
    );
}

#[test]
fn a_reissue_is_authorised_again_and_may_be_by_another_signatory() {
    let t = demo("release-reissue", Some("required"));
    assert_eq!(
        t.limen_at(1795000000, &["review", CERAMICS, "--by", "ivale"])
            .code,
        0
    );
    let r = t.limen_at(
        1795000000,
        &["issue", CERAMICS, "--by", "rokonjo", "--out", "out"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    let reissue = |who: &str| {
        vec![
            "reissue",
            "COA-2611-052",
            "--reason",
            "client address corrected",
            "--force",
            "--by",
            who,
            "--out",
            "out",
            "--workspace",
            "ws",
        ]
        .into_iter()
        .map(String::from)
        .collect::<Vec<_>>()
    };
    let args = reissue("ivale");
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    // The review before revision 0 does not stand for revision 1.
    let r = t.limen_at(1795086400, &args);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(
        r.stderr
            .contains("none recorded since the revision it replaces"),
        "{}",
        r.stderr
    );
    assert_eq!(
        t.limen_at(1795090000, &["review", CERAMICS, "--by", "rokonjo"])
            .code,
        0
    );
    let r = t.limen_at(1795093600, &args);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let text = pdf_text(&t, "out/COA-2611-052-r1.pdf");
    assert!(text.contains("Authorised by Dr Imogen Vale"), "{text}");
    assert!(text.contains("Reviewed by Ruth Okonjo"), "{text}");
    let h = t.limen(&["history", "COA-2611-052", "--workspace", "ws"]);
    let lines: Vec<&str> = h.stdout.lines().collect();
    assert!(
        lines[1].contains("revision 0") && lines[1].contains("by Ruth Okonjo"),
        "{}",
        h.stdout
    );
    assert!(
        lines[2].contains("revision 1") && lines[2].contains("by Dr Imogen Vale"),
        "{}",
        h.stdout
    );
}

#[test]
fn the_older_signatory_form_still_issues_with_a_note() {
    let t = demo("release-old-form", None);
    let lab = t.read("ws/lab.toml");
    let head = lab.split("# Who may authorise").next().unwrap();
    t.write(
        "ws/lab.toml",
        format!("signatory = \"Dr Imogen Vale\"\n{head}"),
    );
    t.signing_key("ws", "default");
    let r = t.limen(&["issue", CERAMICS, "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.contains("is the older form"), "{}", r.stderr);
    assert!(
        pdf_text(&t, "out/COA-2611-052.pdf")
            .contains("Authorised by Dr Imogen Vale, Authorised signatory")
    );
}
