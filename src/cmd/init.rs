use limen::Error;
use limen::error::EXIT_OK;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct Args {
    /// Folder to create the workspace in (created if missing).
    dir: PathBuf,
}

pub fn run(a: Args) -> Result<i32, Error> {
    limen::starter::lay_down(&a.dir, limen::starter::STARTER)?;
    println!("created a starter workspace in {}", a.dir.display());
    for (name, _) in limen::starter::STARTER {
        println!("  {name}");
    }
    println!(
        "next: replace the example rows with your lab's own, then `limen check {}`",
        a.dir.join("example-batch").display()
    );
    Ok(EXIT_OK)
}
