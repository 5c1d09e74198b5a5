//! Files the binary carries: the demo workspace and the starter workspace
//! that `limen init` lays down.

use std::path::Path;

/// The demo scenario (demo-batches/), embedded so `limen demo` runs anywhere.
pub const DEMO: &[(&str, &str)] = &[
    ("lab.toml", include_str!("../demo-batches/lab.toml")),
    ("limits.csv", include_str!("../demo-batches/limits.csv")),
    ("specs.csv", include_str!("../demo-batches/specs.csv")),
    ("README.md", include_str!("../demo-batches/README.md")),
    (
        "furniture-jewellery-2611-041/batch.toml",
        include_str!("../demo-batches/furniture-jewellery-2611-041/batch.toml"),
    ),
    (
        "furniture-jewellery-2611-041/results.csv",
        include_str!("../demo-batches/furniture-jewellery-2611-041/results.csv"),
    ),
    (
        "ceramics-2611-052/batch.toml",
        include_str!("../demo-batches/ceramics-2611-052/batch.toml"),
    ),
    (
        "ceramics-2611-052/leachates.csv",
        include_str!("../demo-batches/ceramics-2611-052/leachates.csv"),
    ),
    (
        "rescreen-2611-058/batch.toml",
        include_str!("../demo-batches/rescreen-2611-058/batch.toml"),
    ),
    (
        "rescreen-2611-058/results.csv",
        include_str!("../demo-batches/rescreen-2611-058/results.csv"),
    ),
    (
        "studies/cd-paint-2611.csv",
        include_str!("../demo-batches/studies/cd-paint-2611.csv"),
    ),
    // The demo signatories' keys: published with the demo, so anyone can
    // sign as these invented people. A real lab's keys never leave keys/.
    (
        "keys/ivale.key.pem",
        include_str!("../demo-batches/keys/ivale.key.pem"),
    ),
    (
        "keys/ivale.cert.pem",
        include_str!("../demo-batches/keys/ivale.cert.pem"),
    ),
    (
        "keys/rokonjo.key.pem",
        include_str!("../demo-batches/keys/rokonjo.key.pem"),
    ),
    (
        "keys/rokonjo.cert.pem",
        include_str!("../demo-batches/keys/rokonjo.cert.pem"),
    ),
];

/// The demo's limit study, its study id and the date its limits take effect:
/// before the batches' analysis dates, as when a register row is found wrong.
pub const DEMO_STUDY: (&str, &str, &str) =
    ("studies/cd-paint-2611.csv", "MDL-2611-CD-PNT", "2026-11-01");

/// The demo's batch folders, in the order the demo runs them.
pub const DEMO_BATCHES: &[&str] = &[
    "furniture-jewellery-2611-041",
    "ceramics-2611-052",
    "rescreen-2611-058",
];

const STARTER_LAB: &str = r#"# Your laboratory. Every key is described in the limen README.
name = "Your Laboratory Name"
address = "Street, Town, Postcode"
# accreditation = "Accreditation body and certificate number"
# review = "required"          # or "independent": a review before release; default "optional"
significant_figures = 3
decision_rule = "simple"        # or "guarded" (ILAC-G8 guard band, needs uncertainty_pct)
compare = "unrounded"           # or "reported"
not_detected_style = "less-than" # or "nd"
page_size = "A4"                # or "Letter"

[methods]
"6010D" = "Acid digestion (EPA SW-846 3050B), ICP-OES (EPA SW-846 6010D)"

# Each person who may authorise release (`limen issue --by ID`), and
# within what: "*", a method ("6010D") or a method and a matrix ("6010D/paint").
[[signatory]]
id = "signatory-1"
name = "Name of the authorised signatory"
role = "Technical Manager"
scope = "*"
"#;

const STARTER_LIMITS: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,nominal_mass_g,nominal_volume_ml,upper_range,upper_range_unit,study_id,note
Pb,paint,6010D,µg/L,10,30,2026-01-05,,,5000,µg/L,REPLACE-WITH-STUDY-ID,example row: replace with your own study's MDL and LOQ
Cd,paint,6010D,µg/L,2.0,6.0,2026-01-05,,,2000,µg/L,REPLACE-WITH-STUDY-ID,example row: replace with your own study's MDL and LOQ
";

const STARTER_SPECS: &str = "spec,analyte,matrix,limit,unit,citation,effective_from
EXAMPLE-PB,Pb,paint,90,mg/kg,Example limit: replace with the governing regulation's limit and citation,2026-01-01
";

const STARTER_BATCH: &str = r#"batch = "EXAMPLE-001"
report = "COA-EXAMPLE-001"
client_name = "Example Client"
client_address = "Client address"
client_contact = "Client contact"
received_on = 2026-01-12
results = "results.csv"
"#;

const STARTER_RESULTS: &str = "lab_id,client_id,description,kind,analyte,matrix,method,reading,reading_unit,dilution,mass_g,volume_ml,analyzed_on,spec,uncertainty_pct,spike_added,parent_id
MB-1,,Method blank,method-blank,Pb,paint,6010D,0.4,µg/L,1,0.1000,50,2026-01-14,,,,
MB-1,,Method blank,method-blank,Cd,paint,6010D,0.1,µg/L,1,0.1000,50,2026-01-14,,,,
LCS-1,,Laboratory control sample,lcs,Pb,paint,6010D,48.6,µg/L,1,0.1000,50,2026-01-14,,,25,
LCS-1,,Laboratory control sample,lcs,Cd,paint,6010D,9.7,µg/L,1,0.1000,50,2026-01-14,,,5,
S001,CLIENT-1,Example paint chip,sample,Pb,paint,6010D,42.0,µg/L,1,0.1000,50,2026-01-14,EXAMPLE-PB,,,
S001,CLIENT-1,Example paint chip,sample,Cd,paint,6010D,0.5,µg/L,1,0.1000,50,2026-01-14,,,,
";

/// The starter workspace for `limen init`.
pub const STARTER: &[(&str, &str)] = &[
    ("lab.toml", STARTER_LAB),
    ("limits.csv", STARTER_LIMITS),
    ("specs.csv", STARTER_SPECS),
    ("example-batch/batch.toml", STARTER_BATCH),
    ("example-batch/results.csv", STARTER_RESULTS),
];

/// Writes `files` under `dir`, refusing to replace any existing file.
pub fn lay_down(dir: &Path, files: &[(&str, &str)]) -> Result<(), crate::output::OutputError> {
    let names: Vec<String> = files.iter().map(|(n, _)| n.to_string()).collect();
    crate::output::check_free(dir, &names)?;
    for (name, text) in files {
        let path = dir.join(name);
        let parent = path.parent().unwrap_or(dir);
        let file = path
            .file_name()
            .map(|f| f.to_string_lossy().into_owned())
            .unwrap_or_default();
        let written = crate::output::write_new(parent, &file, text.as_bytes())?;
        #[cfg(unix)]
        if file.ends_with(".key.pem") {
            use std::os::unix::fs::PermissionsExt;
            std::fs::set_permissions(&written, std::fs::Permissions::from_mode(0o600)).map_err(
                |source| crate::output::OutputError::Io {
                    path: written.display().to_string(),
                    source,
                },
            )?;
        }
    }
    Ok(())
}
