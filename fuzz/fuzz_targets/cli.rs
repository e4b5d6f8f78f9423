//! Fuzz target: the command line, through the real binary. The input bytes choose a command,
//! flags and values from a grammar of what a hostile user types (negative, huge and
//! non-numbers; paths that are inputs, devices, folders, protocol-like names, missing files).
//! Every run must end within 30 s, under a 4 GB address-space cap, with exit 0, 1 or 2, no
//! panic, an `error:` line when it fails, and every input file unchanged.
//!
//! The binary is not built by cargo-fuzz: build it first and name it in `TWISTMARK_BIN`
//! (tools/fuzz.sh does both).
#![no_main]

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::OnceLock;
use std::time::{Duration, Instant};

use libfuzzer_sys::fuzz_target;

struct Bench {
    _dir: tempfile::TempDir,
    root: PathBuf,
    bin: PathBuf,
    inputs: Vec<PathBuf>,
}

fn bench() -> &'static Bench {
    static B: OnceLock<Bench> = OnceLock::new();
    B.get_or_init(|| {
        let bin = PathBuf::from(
            std::env::var_os("TWISTMARK_BIN").expect("set TWISTMARK_BIN to the twistmark binary"),
        );
        let dir = tempfile::tempdir().expect("temp dir");
        let root = dir.path().to_path_buf();
        let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("../fixtures/fast-tool");
        let clip = root.join("clip");
        std::fs::create_dir(&clip).unwrap();
        let mut frames: Vec<PathBuf> = std::fs::read_dir(fixtures.join("frames"))
            .unwrap()
            .map(|e| e.unwrap().path())
            .collect();
        frames.sort();
        let mut inputs = Vec::new();
        for f in frames.iter().take(24) {
            let to = clip.join(f.file_name().unwrap());
            std::fs::copy(f, &to).unwrap();
            inputs.push(to);
        }
        for (name, text) in [
            (
                "rig.json",
                std::fs::read_to_string(fixtures.join("rig.json")).unwrap(),
            ),
            (
                "checks.csv",
                "torque_nm,twist_deg\n50,1.0\n100,2.1\n150,3.0\n".into(),
            ),
            (
                "stills.csv",
                "torque_nm,image\n0,clip/f_00000.png\n40,clip/f_00010.png\n80,clip/f_00020.png\n"
                    .into(),
            ),
            ("12:03:44.mkv", "not a video".into()),
        ] {
            std::fs::write(root.join(name), text).unwrap();
            inputs.push(root.join(name));
        }
        std::fs::create_dir(root.join("batch")).unwrap();
        std::fs::create_dir(root.join("batch/take1")).unwrap();
        for f in frames.iter().take(12) {
            let to = root.join("batch/take1").join(f.file_name().unwrap());
            std::fs::copy(f, &to).unwrap();
            inputs.push(to);
        }
        Bench {
            _dir: dir,
            root,
            bin,
            inputs,
        }
    })
}

const COMMANDS: &[&str] = &[
    "info",
    "analyze",
    "batch",
    "bar",
    "locate",
    "find-marks",
    "calibrate",
    "predict",
    "help",
    "--version",
    "",
];
const FLAGS: &[&str] = &[
    "--rig",
    "--out",
    "--fps",
    "--start-s",
    "--end-s",
    "--jobs",
    "--force",
    "--overlay",
    "--overlay-every",
    "--preview",
    "--pair",
    "--csv",
    "--stills",
    "--reference",
    "--json",
    "--zero-frame",
    "--report",
    "--",
];
const NUMBERS: &[&str] = &[
    "-1", "0", "-0", "1", "2000", "1e-308", "1e308", "NaN", "inf", "10000", "1.5", "abc", "",
    "100:2.3", "-5:1", "1e400:1", "0x10", " 7 ",
];
const PATHS: &[&str] = &[
    "clip",
    "rig.json",
    "checks.csv",
    "stills.csv",
    "batch",
    "batch/take1",
    "out",
    "out/sub",
    "clip/f_00000.png",
    "file:rig.json",
    "12:03:44.mkv",
    "/dev/zero",
    "/dev/null",
    "missing",
    ".",
    "..",
    "-",
    "out/report.json",
    "batch/take1/f_00000.png",
];

/// Reads the next choice in 0..n from the input (0 when the input is used up).
fn pick(data: &mut &[u8], n: usize) -> usize {
    match data.split_first() {
        Some((b, rest)) => {
            *data = rest;
            usize::from(*b) % n
        }
        None => 0,
    }
}

fn snapshot(inputs: &[PathBuf]) -> Vec<Option<Vec<u8>>> {
    inputs.iter().map(|p| std::fs::read(p).ok()).collect()
}

fuzz_target!(|data: &[u8]| {
    let b = bench();
    let mut data = data;
    let mut args: Vec<String> = vec![COMMANDS[pick(&mut data, COMMANDS.len())].to_string()];
    if pick(&mut data, 4) != 0 {
        args.push(PATHS[pick(&mut data, PATHS.len())].to_string());
    }
    let nflags = pick(&mut data, 7);
    for _ in 0..nflags {
        let flag = FLAGS[pick(&mut data, FLAGS.len())];
        args.push(flag.to_string());
        match pick(&mut data, 3) {
            0 => args.push(NUMBERS[pick(&mut data, NUMBERS.len())].to_string()),
            1 => args.push(PATHS[pick(&mut data, PATHS.len())].to_string()),
            _ => {}
        }
    }
    // Outputs from the last run go, so "already holds results" is not the only answer.
    let _ = std::fs::remove_dir_all(b.root.join("out"));
    let before = snapshot(&b.inputs);
    let mut cmd = Command::new(&b.bin);
    cmd.args(&args)
        .current_dir(&b.root)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    #[cfg(unix)]
    {
        use std::os::unix::process::CommandExt;
        // SAFETY: setrlimit is async-signal-safe and only touches the child's own limits.
        unsafe {
            cmd.pre_exec(|| {
                let cap = libc::rlimit {
                    rlim_cur: 4 << 30,
                    rlim_max: 4 << 30,
                };
                if libc::setrlimit(libc::RLIMIT_AS, &cap) != 0 {
                    return Err(std::io::Error::last_os_error());
                }
                Ok(())
            });
        }
    }
    let mut child = cmd.spawn().expect("spawn twistmark");
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().expect("wait") {
            break s;
        }
        if start.elapsed() > Duration::from_secs(30) {
            let _ = child.kill();
            panic!("hang: twistmark {args:?} ran past 30 s");
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let out = child.wait_with_output().expect("output");
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    let code = status.code();
    assert!(
        matches!(code, Some(0..=2)),
        "twistmark {args:?} ended with {status} (signal or odd code): {stderr}"
    );
    assert!(
        !stdout.contains("panicked") && !stderr.contains("panicked"),
        "panic in twistmark {args:?}: {stderr}"
    );
    if code == Some(1) {
        let last = stderr
            .lines()
            .rev()
            .find(|l| !l.trim().is_empty())
            .unwrap_or("");
        assert!(
            last.starts_with("error: "),
            "twistmark {args:?} exit 1 without an error line: {stderr}"
        );
    }
    assert_eq!(
        before,
        snapshot(&b.inputs),
        "twistmark {args:?} changed an input"
    );
});
