use limen::Error;
use limen::error::EXIT_OK;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// Folder to create the workspace in (created if missing).
    dir: PathBuf,
}

pub fn run(a: Args) -> Result<i32, Error> {
    let templates: Vec<(String, &str)> = limen::templates::DEFAULTS
        .iter()
        .map(|(name, text)| (format!("templates/{name}.hbs"), *text))
        .collect();
    let mut files: Vec<(&str, &str)> = limen::starter::STARTER.to_vec();
    files.extend(templates.iter().map(|(n, t)| (n.as_str(), *t)));
    limen::starter::lay_down(&a.dir, &files)?;
    println!("created a starter workspace in {}", a.dir.display());
    for (name, _) in limen::starter::STARTER {
        println!("  {name}");
    }
    println!(
        "  templates/ (the certificate's wording; edit to suit, delete a file to use the default)"
    );
    println!(
        "next: replace the example rows with your lab's own, then `limen check {}`",
        a.dir.join("example-batch").display()
    );
    Ok(EXIT_OK)
}
