//! A sweep submitted to a real Slurm (`tinct sweep --scheduler slurm --submit`): every member
//! runs as a task of the array job and its results equal the local backend's bit for bit.
//! Runs when `sbatch` answers and `SLURM_CONF` is set (CI starts a single-node Slurm from
//! `../shared/tools/slurm-local/` first); says it was skipped otherwise.

mod common;

use common::{c_max, tinct, write_sweep_base};
use std::process::Command;
use std::time::{Duration, Instant};

fn slurm_available() -> bool {
    std::env::var_os("SLURM_CONF").is_some()
        && Command::new("sbatch")
            .arg("--version")
            .output()
            .is_ok_and(|o| o.status.success())
}

fn squeue(args: &[&str]) -> String {
    let o = Command::new("squeue").args(args).output().expect("squeue runs");
    assert!(
        o.status.success(),
        "squeue {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

// Reference: the local backend of the same sweep (each member on one thread in both).
#[test]
fn slurm_array_matches_local_backend() {
    if !slurm_available() {
        println!("skipped: no Slurm (sbatch not found or SLURM_CONF unset)");
        return;
    }
    let dir = tempfile::tempdir_in(std::env::var_os("TMPDIR").unwrap_or_else(|| "/tmp".into())).unwrap();
    write_sweep_base(dir.path(), 40, 1200.0);
    let sweep = "base = \"base.toml\"\nname = \"s\"\n[axes]\n\"source[0].start\" = [0, 120]\n\"tracer.diffusivity\" = [0.25, 0.5, 1.0, 2.0]\n";
    std::fs::write(dir.path().join("s.toml"), sweep).unwrap();

    let o = tinct(
        &["sweep", "s.toml", "--out", "slurm", "--scheduler", "slurm", "--submit"],
        dir.path(),
    );
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{out}\n{}", String::from_utf8_lossy(&o.stderr));
    // "submitted: array job <id> (8 tasks), gather job <id>"
    let line = out
        .lines()
        .find(|l| l.starts_with("submitted:"))
        .expect("job ids printed");
    let ids: Vec<&str> = line
        .split(|c: char| !c.is_ascii_digit())
        .filter(|s| !s.is_empty() && *s != "8")
        .collect();
    let (array, gather) = (ids[0], ids[1]);
    assert!(out.contains(&format!("squeue -j {array},{gather}")), "{out}");

    // Meanwhile the same sweep on the local backend.
    let local = tinct(&["sweep", "s.toml", "--out", "local", "--quiet"], dir.path());
    let err = String::from_utf8_lossy(&local.stderr);
    assert!(local.status.success(), "{err}");

    let t0 = Instant::now();
    while !squeue(&["-h", "-j", &format!("{array},{gather}")]).trim().is_empty() {
        assert!(
            t0.elapsed() < Duration::from_secs(120),
            "the jobs did not end within 120 s"
        );
        std::thread::sleep(Duration::from_millis(500));
    }
    let states = squeue(&["-h", "-t", "all", "-j", array, "-o", "%i %T"]);
    let root = dir.path().join("slurm/s");
    for i in 0..8 {
        assert!(
            states.lines().any(|l| l.trim() == format!("{array}_{i} COMPLETED")),
            "task {i} not COMPLETED: {states}"
        );
        let log = std::fs::read_to_string(root.join(format!("logs/{i}.out"))).unwrap();
        assert!(
            log.contains(&format!("SLURM_ARRAY_JOB_ID={array} SLURM_ARRAY_TASK_ID={i} ")),
            "task {i} log: {log}"
        );
        let m = format!("members/{i:04}");
        assert_eq!(std::fs::read_to_string(root.join(&m).join("exit_code")).unwrap(), "0\n");
        let (a, b) = (
            c_max(&root.join(&m).join("fields.nc")),
            c_max(&dir.path().join("local/s").join(&m).join("fields.nc")),
        );
        assert_eq!(a.len(), 40 * 20);
        assert!(a.iter().any(|&v| v > 0.0));
        assert!(
            a.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()),
            "member {i}: c_max differs between Slurm and the local backend"
        );
    }
    // The gather job ran after the array, and its probabilities and ensemble maximum equal
    // those the local backend gathered, bit for bit.
    let gstates = squeue(&["-h", "-t", "all", "-j", gather, "-o", "%i %T"]);
    assert!(
        gstates.lines().any(|l| l.trim() == format!("{gather} COMPLETED")),
        "gather job not COMPLETED: {gstates}"
    );
    let (slurm_nc, local_nc) = (
        root.join("gather/ensemble.nc"),
        dir.path().join("local/s/gather/ensemble.nc"),
    );
    let names: Vec<String> = {
        let r = netcdf3::FileReader::open(&slurm_nc).unwrap();
        r.data_set().get_var_names()
    };
    let compared: Vec<&String> = names
        .iter()
        .filter(|n| n.starts_with("probability_above_") || *n == "c_max_ensemble")
        .collect();
    assert!(compared.len() >= 2, "variables in ensemble.nc: {names:?}");
    for name in compared {
        let read = |p: &std::path::Path| {
            let mut r = netcdf3::FileReader::open(p).unwrap();
            r.read_var(name).unwrap().get_f64_into().unwrap()
        };
        let (a, b) = (read(&slurm_nc), read(&local_nc));
        assert_eq!(a.len(), b.len());
        assert!(
            a.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()),
            "{name} differs between the Slurm gather and the local one"
        );
        if name.starts_with("probability_above_") {
            assert!(a.iter().any(|&p| p > 0.0), "{name} is zero everywhere");
        }
    }
}
