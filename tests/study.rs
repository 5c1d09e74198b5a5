//! `limen study` through the binary: values, outputs and the register update.

mod util;
use util::{TestDir, csv_row};

const LAB: &str = "name = \"Fixture Lab\"\naddress = \"1 Test Road\"\nsignatory = \"A. Analyst\"\n[qc]\nrequired = []\n";
const LIMITS: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,nominal_mass_g,nominal_volume_ml,upper_range,upper_range_unit,study_id,note\n\
Pb,paint,6010D,ug/L,8,25,2025-01-01,,,5000,ug/L,S-OLD,first study\n";
const HEAD: &str =
    "analyte,matrix,method,kind,value,unit,prepared_on,analyzed_on,batch,spike_level,lab_id\n";

/// Berthouex & Brown, Statistics for Environmental Engineers, 2nd ed., Example 14.1,
/// first set of seven (s = 0.32, MDL = 3.143 × 0.32 = 1.0), with seven ND blanks.
fn study_csv(spikes: &[&str]) -> String {
    let mut s = String::from(HEAD);
    for (i, v) in spikes.iter().enumerate() {
        let d = format!("2026-11-{:02}", 10 + i % 3);
        s.push_str(&format!(
            "Pb,paint,6010D,spike,{v},ug/L,{d},{d},B{},5,SP{i}\n",
            i % 3
        ));
    }
    for i in 0..7 {
        s.push_str(&format!(
            "Pb,paint,6010D,blank,ND,ug/L,2026-11-10,2026-11-10,B0,,BL{i}\n"
        ));
    }
    s
}

const SET1: [&str; 7] = ["2.5", "2.7", "2.2", "2.2", "3.1", "2.6", "2.8"];

fn fixture(name: &str) -> TestDir {
    let t = TestDir::new(name);
    t.write("ws/lab.toml", LAB);
    t.write("ws/limits.csv", LIMITS);
    t.write(
        "ws/specs.csv",
        "spec,analyte,matrix,limit,unit,citation,effective_from\n",
    );
    t.write("ws/study.csv", study_csv(&SET1));
    t
}

#[test]
fn study_csv_carries_the_full_precision_values() {
    let t = fixture("study-csv");
    let r = t.limen(&["study", "ws/study.csv", "--csv", "ws/out.csv"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("MDL_S governs"), "{}", r.stdout);
    let csv = t.read("ws/out.csv");
    let mut rd = csv::Reader::from_reader(csv.as_bytes());
    let headers: Vec<String> = rd.headers().unwrap().iter().map(String::from).collect();
    let first = rd.records().next().unwrap().unwrap();
    let rec: std::collections::HashMap<String, String> = headers
        .into_iter()
        .zip(first.iter().map(String::from))
        .collect();
    let f = |k: &str| rec[k].parse::<f64>().unwrap();
    assert_eq!(rec["n_spike"], "7");
    assert_eq!(format!("{:.2}", f("sd_spike")), "0.32");
    assert_eq!(format!("{:.3}", f("t_value")), "3.143");
    assert_eq!(format!("{:.1}", f("mdl_s")), "1.0");
    assert_eq!(rec["mdl_b"], "");
    assert_eq!(rec["governs"], "MDL_S");
    assert_eq!(rec["loq_rule"], "ten-sd");
    assert!((f("loq") - 10.0 * f("sd_spike")).abs() < 1e-12);
    // Full precision, not rounded: more digits than any report would print.
    assert!(rec["mdl"].len() > 8, "{}", rec["mdl"]);
}

#[test]
fn the_register_update_keeps_old_rows_and_takes_effect_on_its_date() {
    let t = fixture("study-register");
    let before = t.read("ws/limits.csv");
    let r = t.limen(&[
        "study",
        "ws/study.csv",
        "--register",
        "ws/limits.csv",
        "--effective",
        "2026-12-01",
        "--study-id",
        "S-NEW",
    ]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    // This register has no sd and n columns: the study says what is lost.
    assert!(r.stderr.contains("has no sd or n column"), "{}", r.stderr);
    let after = t.read("ws/limits.csv");
    assert!(
        after.starts_with(&before),
        "old rows must stay byte for byte"
    );
    let added = &after[before.len()..];
    // By hand: s² = 0.628571 / 6 = 0.104762, s = 0.323669; MDL = 3.142668 × s = 1.01718,
    // LOQ = 10 s = 3.23669; rounded up to 3 figures: 1.02 and 3.24.
    assert_eq!(
        added,
        "Pb,paint,6010D,µg/L,1.02,3.24,2026-12-01,,,5000,µg/L,S-NEW,40 CFR 136 App. B Rev. 2: MDL_S governs; LOQ ten-sd\n"
    );
    // A batch analysed on the effective date uses the new row; the day before, the old one.
    t.write("ws/b/batch.toml", "batch='B'\nreport='R'\nclient_name='c'\nclient_address='a'\nclient_contact='p'\nreceived_on=2026-11-28\nresults='r.csv'\n");
    t.write(
        "ws/b/r.csv",
        "lab_id,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on\n\
         S1,sample,Pb,paint,6010D,5,ug/L,1,0.100,50,2026-11-30\n\
         S2,sample,Pb,paint,6010D,5,ug/L,1,0.100,50,2026-12-01\n",
    );
    let r = t.limen(&["check", "ws/b", "--format", "csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["limits_row"], "S-OLD");
    assert_eq!(csv_row(&r.stdout, "S1", "Pb")["state"], "not-detected");
    assert_eq!(csv_row(&r.stdout, "S2", "Pb")["limits_row"], "S-NEW");
    assert_eq!(csv_row(&r.stdout, "S2", "Pb")["state"], "quantified");
    // The same key and date again is refused, and the register is untouched.
    let r = t.limen(&[
        "study",
        "ws/study.csv",
        "--register",
        "ws/limits.csv",
        "--effective",
        "2026-12-01",
        "--study-id",
        "S-AGAIN",
    ]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr
            .contains("already has a row in force from 2026-12-01"),
        "{}",
        r.stderr
    );
    assert_eq!(t.read("ws/limits.csv"), after);
}

#[test]
fn too_few_spikes_write_nothing() {
    let t = fixture("study-few");
    t.write("ws/study.csv", study_csv(&SET1[..6]));
    let before = t.read("ws/limits.csv");
    let r = t.limen(&[
        "study",
        "ws/study.csv",
        "--csv",
        "ws/out.csv",
        "--register",
        "ws/limits.csv",
        "--effective",
        "2026-12-01",
        "--study-id",
        "X",
    ]);
    assert_eq!(r.code, 3);
    assert!(
        r.stdout
            .contains("6 numeric spike result(s); Appendix B needs at least 7"),
        "{}",
        r.stdout
    );
    assert!(!t.exists("ws/out.csv"));
    assert_eq!(t.read("ws/limits.csv"), before);
}

#[test]
fn exclusions_need_a_reason_and_the_reason_is_carried() {
    let t = fixture("study-exclude");
    let mut spikes = SET1.to_vec();
    spikes.push("7.9");
    t.write("ws/study.csv", study_csv(&spikes));
    let r = t.limen(&["study", "ws/study.csv", "--exclude", "SP7"]);
    assert_eq!(r.code, 2);
    let r = t.limen(&["study", "ws/study.csv"]);
    assert!(
        r.stdout.contains("suspected outlier: spike SP7"),
        "{}",
        r.stdout
    );
    let r = t.limen(&[
        "study",
        "ws/study.csv",
        "--exclude",
        "SP7",
        "--reason",
        "digestion vessel cracked",
        "--csv",
        "ws/o.csv",
        "--register",
        "ws/limits.csv",
        "--effective",
        "2026-12-01",
        "--study-id",
        "S-X",
    ]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("excluded SP7: digestion vessel cracked"));
    assert!(
        t.read("ws/o.csv")
            .contains("excluded SP7: digestion vessel cracked")
    );
    assert!(
        t.read("ws/limits.csv")
            .contains("excluded SP7: digestion vessel cracked")
    );
}

#[test]
fn bad_study_input_names_file_line_and_field() {
    let t = fixture("study-bad");
    let body = study_csv(&SET1).replacen("spike,2.5,", "spike,<0.5,", 1);
    t.write("ws/study.csv", body);
    let r = t.limen(&["study", "ws/study.csv"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("study.csv:2: field `value`"),
        "{}",
        r.stderr
    );
    t.write(
        "ws/study.csv",
        study_csv(&SET1).replacen("spike,2.5,ug/L", "spike,2.5,mg/L", 1),
    );
    let r = t.limen(&["study", "ws/study.csv"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("field `unit`"), "{}", r.stderr);
}

#[test]
fn verification_keeps_or_replaces_the_mdl_in_force() {
    let t = fixture("study-verify");
    // Routine spikes over a year, two a quarter, around an MDL near 1.0.
    let mut s = String::from(HEAD);
    let values = ["2.5", "2.7", "2.2", "2.2", "3.1", "2.6", "2.8", "2.4"];
    for (i, v) in values.iter().enumerate() {
        let d = format!("2026-{:02}-15", 1 + i * 3 / 2);
        s.push_str(&format!("Pb,paint,6010D,spike,{v},ug/L,{d},{d},Q,5,R{i}\n"));
        s.push_str(&format!("Pb,paint,6010D,blank,0.1,ug/L,{d},{d},Q,,RB{i}\n"));
    }
    t.write("ws/routine.csv", &s);
    // The register's MDL of 8 is far above the recomputed ~1: ratio < 0.5 -> replace.
    let r = t.limen(&["study", "ws/routine.csv", "--verify"]);
    assert_eq!(r.code, 3, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("MUST BE REPLACED"), "{}", r.stdout);
    assert!(r.stdout.contains("outside 0.5–2.0"), "{}", r.stdout);
    // An MDL in force of 1.2 is within 0.5–2.0 × and no blank exceeds it: keep.
    t.write("ws/limits.csv", LIMITS.replace("ug/L,8,25", "ug/L,1.2,4"));
    let r = t.limen(&["study", "ws/routine.csv", "--verify"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("MAY BE KEPT"), "{}", r.stdout);
    assert!(
        !r.stdout.contains("a quarter"),
        "two spikes in every quarter: {}",
        r.stdout
    );
    // Drop November's spike: the fourth quarter has one.
    let thin: String = s
        .lines()
        .filter(|l| !l.contains(",R7"))
        .map(|l| format!("{l}\n"))
        .collect();
    t.write("ws/thin.csv", thin);
    let r = t.limen(&["study", "ws/thin.csv", "--verify"]);
    assert!(
        r.stdout
            .contains("2026-Q4 had 1 spike(s); Revision 2 asks for at least 2 a quarter"),
        "{}",
        r.stdout
    );
}

#[test]
fn each_analyte_matrix_and_method_is_computed_on_its_own() {
    let t = fixture("study-groups");
    let pb = study_csv(&SET1);
    let cd: String = study_csv(&["1.6", "1.9", "1.3", "1.7", "2.1", "0.9", "1.8"])
        .lines()
        .skip(1)
        .map(|l| format!("{}\n", l.replacen("Pb,", "Cd,", 1)))
        .collect();
    t.write("ws/two.csv", format!("{pb}{cd}"));
    let r = t.limen(&["study", "ws/two.csv", "--csv", "ws/two-out.csv"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    let out = t.read("ws/two-out.csv");
    let analytes = util::csv_column(&out, "analyte");
    let mdl: Vec<f64> = util::csv_column(&out, "mdl_s")
        .iter()
        .map(|v| v.parse().unwrap())
        .collect();
    assert_eq!(analytes, vec!["Pb", "Cd"]);
    // Berthouex & Brown, Example 14.1: MDL 1.0 and 1.3 for the two sets.
    assert_eq!(
        (format!("{:.1}", mdl[0]), format!("{:.1}", mdl[1])),
        ("1.0".into(), "1.3".into())
    );
}

#[test]
fn calibration_and_baseline_modes() {
    let t = fixture("study-cal");
    t.write(
        "ws/cal.csv",
        "level,response\n1,2.1\n2,3.9\n3,6.2\n4,7.8\n5,10.0\n",
    );
    let r = t.limen(&["study", "--calibration", "ws/cal.csv"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    // DL = 3.3 × 0.174165 / 1.97 = 0.292, QL = 0.884 (ICH Q2(R2), hand-checked line).
    assert!(r.stdout.contains("DL = 3.3 σ / S = 0.292"), "{}", r.stdout);
    assert!(r.stdout.contains("QL = 10 σ / S  = 0.884"), "{}", r.stdout);
    let mut trace = String::from("x,signal\n");
    for x in 0..30 {
        trace.push_str(&format!(
            "{x},{}\n",
            10.0 + if x % 2 == 0 { 0.5 } else { -0.5 } + if x == 20 { 12.0 } else { 0.0 }
        ));
    }
    t.write("ws/trace.csv", trace);
    let r = t.limen(&[
        "study",
        "--baseline",
        "ws/trace.csv",
        "--window",
        "0:14",
        "--peak",
        "18:22",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("ESTIMATE"));
    assert!(r.stdout.contains("peak at x = 20"), "{}", r.stdout);
}

#[test]
fn study_record_pdf_holds_the_results_and_every_replicate() {
    let t = fixture("study-pdf");
    let r = t.limen(&["study", "ws/study.csv", "--pdf", "ws/record.pdf"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    let out = std::process::Command::new("pdftotext")
        .args(["-layout", "-enc", "UTF-8"])
        .arg(t.path("ws/record.pdf"))
        .arg("-")
        .output()
        .expect("pdftotext");
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("Detection-limit study record"));
    assert!(text.contains("t(n−1, 0.99) = 3.143"), "{text}");
    assert!(text.contains("MDL_S governs"));
    for i in 0..7 {
        assert!(text.contains(&format!("SP{i}")), "SP{i} missing");
        assert!(text.contains(&format!("BL{i}")), "BL{i} missing");
    }
}

#[test]
fn the_register_update_keeps_the_spike_sd_and_count() {
    let t = fixture("study-register-sd");
    t.write(
        "ws/limits.csv",
        LIMITS
            .replace("study_id,note\n", "study_id,note,sd,n\n")
            .replace("first study\n", "first study,2.5,7\n"),
    );
    let r = t.limen(&[
        "study",
        "ws/study.csv",
        "--register",
        "ws/limits.csv",
        "--effective",
        "2026-12-01",
        "--study-id",
        "S-NEW",
    ]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(!r.stderr.contains("no sd"), "{}", r.stderr);
    let after = t.read("ws/limits.csv");
    // s = 0.323669 (by hand, Berthouex & Brown Example 14.1 set 1), rounded
    // up to 3 figures as the limits are; 7 spikes.
    assert!(
        after.ends_with("S-NEW,40 CFR 136 App. B Rev. 2: MDL_S governs; LOQ ten-sd,0.324,7\n"),
        "{after}"
    );
}
