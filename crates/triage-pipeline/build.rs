//! Records the git commit this crate is built from (`CCM_TRIAGE_COMMIT`, "unknown" outside a
//! git checkout unless the environment sets it), for run.json.

use std::process::Command;

fn git(args: &[&str]) -> Option<String> {
    let out = Command::new("git").args(args).output().ok()?;
    out.status
        .success()
        .then(|| String::from_utf8_lossy(&out.stdout).trim().to_string())
        .filter(|s| !s.is_empty())
}

fn main() {
    // A packager without git can set the commit from outside.
    let commit = std::env::var("CCM_TRIAGE_COMMIT")
        .ok()
        .or_else(|| git(&["rev-parse", "HEAD"]))
        .unwrap_or_else(|| "unknown".into());
    println!("cargo:rustc-env=CCM_TRIAGE_COMMIT={commit}");
    // Rebuild the constant when HEAD moves: HEAD itself (a checkout) and the branch it names
    // (a commit), wherever git keeps them (worktrees keep HEAD apart from the refs).
    for (flag, path) in [
        ("--git-path", "HEAD"),
        ("--git-path", "packed-refs"),
        ("--symbolic-full-name", "HEAD"),
    ] {
        if let Some(p) = git(&["rev-parse", flag, path]) {
            let p = if flag == "--symbolic-full-name" {
                match git(&["rev-parse", "--git-path", &p]) {
                    Some(q) => q,
                    None => continue,
                }
            } else {
                p
            };
            // A path that does not exist would make cargo rerun this script on every build.
            if std::path::Path::new(&p).exists() {
                println!("cargo:rerun-if-changed={p}");
            }
        }
    }
    println!("cargo:rerun-if-env-changed=CCM_TRIAGE_COMMIT");
}
