//! A 4-task Slurm job array on a real single-node Slurm reproduces the single-process scan.
//!
//! `.ci/run` installs Debian's slurm-wlm and munge; this test starts the controller and the
//! compute daemon itself (tests/slurm/cluster.sh), submits scripts/slurm-array.sh as
//! `sbatch --wait --array=1-4`, merges the four shard directories and compares the files
//! byte for byte with `ccm-triage scan` in one process. Without Slurm it skips with a printed
//! reason, except under CI=true, where it fails so CI cannot pass by skipping.

mod support;

use std::path::{Path, PathBuf};
use std::process::Command;

use support::{SMALL, assert_same_outputs, logistic_ring_csv};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn cluster_script() -> PathBuf {
    Path::new(ROOT).join("tests/slurm/cluster.sh")
}

/// Why this machine cannot run the test, if it cannot.
fn missing_requirement() -> Option<String> {
    for program in ["slurmctld", "slurmd", "sbatch", "sinfo", "munged", "munge"] {
        let found = Command::new("sh")
            .args([
                "-c",
                &format!("command -v {program} || test -x /usr/sbin/{program}"),
            ])
            .output()
            .map(|o| o.status.success())
            .unwrap_or(false);
        if !found {
            return Some(format!(
                "{program} is not installed (apt-get install slurm-wlm munge)"
            ));
        }
    }
    let uid = Command::new("id").arg("-u").output().ok()?;
    if String::from_utf8_lossy(&uid.stdout).trim() != "0" {
        return Some("the single-node cluster runs its daemons as root".into());
    }
    None
}

/// Stops the daemons (by their pid files) however the test ends.
struct Cluster {
    dir: PathBuf,
}

impl Cluster {
    fn start(dir: &Path) -> Self {
        let status = Command::new("bash")
            .arg(cluster_script())
            .args(["start".as_ref(), dir.as_os_str()])
            .status()
            .expect("run cluster.sh");
        let cluster = Cluster {
            dir: dir.to_path_buf(),
        };
        assert!(
            status.success(),
            "the single-node Slurm cluster did not start (logs in {})",
            dir.display()
        );
        cluster
    }

    fn conf(&self) -> PathBuf {
        self.dir.join("slurm.conf")
    }
}

impl Drop for Cluster {
    fn drop(&mut self) {
        let _ = Command::new("bash")
            .arg(cluster_script())
            .args(["stop".as_ref(), self.dir.as_os_str()])
            .status();
    }
}

#[test]
fn slurm_array_of_four_shards_reproduces_the_single_run() {
    if let Some(reason) = missing_requirement() {
        if std::env::var("CI").as_deref() == Ok("true") {
            panic!("CI=true but the Slurm test cannot run: {reason}");
        }
        eprintln!("skipping the Slurm test: {reason}");
        return;
    }
    let tmp = tempfile::tempdir().unwrap();
    let work = tmp.path().join("work");
    std::fs::create_dir(&work).unwrap();
    std::fs::write(work.join("data.csv"), logistic_ring_csv(12, 300)).unwrap();
    let bin = assert_cmd::cargo::cargo_bin("ccm-triage");

    let single = Command::new(&bin)
        .args(["scan", "data.csv", "--out", "single"])
        .args(SMALL)
        .current_dir(&work)
        .status()
        .unwrap();
    assert!(single.success());

    let cluster = Cluster::start(&tmp.path().join("slurm"));
    let submitted = Command::new("sbatch")
        .args(["--wait", "--array=1-4", "--chdir"])
        .arg(&work)
        .arg(Path::new(ROOT).join("scripts/slurm-array.sh"))
        .args(["data.csv", "shard"])
        .args(SMALL)
        .env("SLURM_CONF", cluster.conf())
        .env("CCM_TRIAGE", &bin)
        .current_dir(&work)
        .output()
        .unwrap();
    let logs: String = (1..=4)
        .filter_map(|_| None::<String>)
        .chain(std::fs::read_dir(&work).unwrap().filter_map(|e| {
            let p = e.ok()?.path();
            let name = p.file_name()?.to_string_lossy().into_owned();
            name.ends_with(".log")
                .then(|| std::fs::read_to_string(&p).unwrap_or_default())
        }))
        .collect();
    assert!(
        submitted.status.success(),
        "sbatch failed: {}\n{}\ntask logs:\n{logs}",
        String::from_utf8_lossy(&submitted.stdout),
        String::from_utf8_lossy(&submitted.stderr)
    );
    drop(cluster);

    let merged = Command::new(&bin)
        .args([
            "merge", "shard-1", "shard-2", "shard-3", "shard-4", "--out", "merged", "--quiet",
        ])
        .current_dir(&work)
        .output()
        .unwrap();
    assert!(
        merged.status.success(),
        "{}",
        String::from_utf8_lossy(&merged.stderr)
    );
    for k in 1..=4 {
        let manifest =
            std::fs::read_to_string(work.join(format!("shard-{k}/manifest.json"))).unwrap();
        assert!(manifest.contains(&format!("\"index\": {k}")) && manifest.contains("\"count\": 4"));
    }
    assert_same_outputs(&work.join("single"), &work.join("merged"));
}
