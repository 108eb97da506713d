//! CLI tests with the real binary: every bad-input case of the foundation gets a
//! one-line error, the right exit code, and nothing written.

use crate::harness::{Scratch, pumice};

/// A 4×3 8-bit RGB PNG written with the png crate directly.
pub fn small_png(s: &Scratch, name: &str) -> std::path::PathBuf {
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, 4, 3);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut w = enc.write_header().unwrap();
        let data: Vec<u8> = (0..36).map(|i| (i * 7) as u8).collect();
        w.write_image_data(&data).unwrap();
    }
    s.write(name, &bytes)
}

#[test]
fn a_plain_run_writes_the_output() {
    let s = Scratch::new();
    let input = small_png(&s, "in.png");
    pumice(&[
        "run".as_ref(),
        input.as_os_str(),
        "-o".as_ref(),
        s.path("out.png").as_os_str(),
        "-s".as_ref(),
        "invert".as_ref(),
    ])
    .ok();
    assert_eq!(s.names(), ["in.png", "out.png"]);
}

/// Runs `pumice run IN -o OUT EXTRA…` inside `s` and returns the run.
fn run_in(s: &Scratch, input: &str, output: &str, extra: &[&str]) -> crate::harness::Run {
    let mut args: Vec<String> = vec!["run".into(), s.path(input).display().to_string(), "-o".into()];
    args.push(if output == "-" { "-".into() } else { s.path(output).display().to_string() });
    args.extend(extra.iter().map(|a| a.to_string()));
    pumice(&args)
}

#[test]
fn missing_input_file() {
    let s = Scratch::new();
    run_in(&s, "nope.png", "out.png", &[])
        .expect_code(1)
        .one_line_error()
        .stderr_has(&["nope.png", "reading"]);
    assert!(s.names().is_empty());
}

#[test]
fn unknown_format() {
    let s = Scratch::new();
    s.write("notes.png", b"these are words, not pixels");
    run_in(&s, "notes.png", "out.png", &[]).expect_code(1).one_line_error().stderr_has(&[
        "notes.png",
        "not an image format",
        "PNG, JPEG, TIFF",
    ]);
    assert_eq!(s.names(), ["notes.png"]);
}

#[test]
fn truncated_file() {
    let s = Scratch::new();
    let good = std::fs::read(small_png(&s, "good.png")).unwrap();
    s.write("cut.png", &good[..good.len() - 30]);
    run_in(&s, "cut.png", "out.png", &[])
        .expect_code(1)
        .one_line_error()
        .stderr_has(&["cut.png", "decoding", "PNG"]);
    assert_eq!(s.names(), ["cut.png", "good.png"]);
}

#[test]
fn image_over_the_pixel_limit() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "out.png", &["--max-pixels", "11"])
        .expect_code(1)
        .one_line_error()
        .stderr_has(&["4×3 = 12 pixels", "limit of 11"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn unknown_operator_suggests_the_nearest() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "out.png", &["-s", "guass:2"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["unknown operator `guass`", "did you mean `gauss`?"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn unknown_and_out_of_range_parameters() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "out.png", &["-s", "gauss:sigmaa=2"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["unknown parameter `sigmaa`", "did you mean `sigma`?"]);
    run_in(&s, "in.png", "out.png", &["-s", "gauss:sigma=-1"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["parameter `sigma` must be a number in (0, 1000]", "`-1`"]);
    run_in(&s, "in.png", "out.png", &["-s", "flip:sideways"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["expected one of horizontal, vertical, both"]);
    run_in(&s, "in.png", "out.png", &["-s", "gauss"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["needs parameter `sigma`"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn malformed_matrix() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "out.png", &["-s", "convolve:kernel=1 2 1;2 4"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["malformed matrix", "row 2 has 2 numbers but row 1 has 3"]);
    run_in(&s, "in.png", "out.png", &["-s", "convolve:kernel=1 2;3 4"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["odd number of rows and columns"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn existing_output_is_not_overwritten_without_asking() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    s.write("out.png", b"precious");
    run_in(&s, "in.png", "out.png", &[])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["already exists", "--overwrite"]);
    assert_eq!(std::fs::read(s.path("out.png")).unwrap(), b"precious");
    run_in(&s, "in.png", "out.png", &["--overwrite"]).ok();
    assert_ne!(std::fs::read(s.path("out.png")).unwrap(), b"precious");
    assert_eq!(s.names(), ["in.png", "out.png"]);
}

#[test]
fn missing_output_folder() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "no/such/folder/out.png", &[])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["does not exist"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn input_equal_to_output() {
    let s = Scratch::new();
    let input = small_png(&s, "in.png");
    let before = std::fs::read(&input).unwrap();
    run_in(&s, "in.png", "in.png", &["--overwrite"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["is the input"]);
    // The same file reached by another spelling of its path.
    let other = format!("{}/./in.png", s.path("").display());
    pumice(&["run", &input.display().to_string(), "-o", &other, "--overwrite"])
        .expect_code(2)
        .stderr_has(&["is the input"]);
    assert_eq!(std::fs::read(&input).unwrap(), before);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn recipe_with_a_syntax_error_names_line_and_column() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    s.write("bad.toml", b"[[step]]\nop = \"gauss\"\nsigma = = 2\n");
    let recipe = s.path("bad.toml").display().to_string();
    run_in(&s, "in.png", "out.png", &["-r", &recipe])
        .expect_code(2)
        .stderr_has(&["bad.toml", "line 3, column"]);
    pumice(&["recipe", "check", &recipe]).expect_code(2).stderr_has(&["line 3, column"]);
    assert_eq!(s.names(), ["bad.toml", "in.png"]);
}

#[test]
fn unknown_output_format_and_unwritable_depth() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "out.xyz", &[])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["cannot tell the output format", "--format"]);
    run_in(&s, "in.png", "out.jpg", &["--depth", "16"])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["JPEG cannot hold 16-bit"]);
    run_in(&s, "in.png", "-", &[])
        .expect_code(2)
        .one_line_error()
        .stderr_has(&["standard output needs --format"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn step_that_cannot_run_on_this_image_fails_the_file() {
    let s = Scratch::new();
    small_png(&s, "in.png");
    run_in(&s, "in.png", "out.png", &["-s", "crop:x=2,width=5,height=1"])
        .expect_code(1)
        .one_line_error()
        .stderr_has(&["step 1 (crop)", "outside the 4×3 image"]);
    assert_eq!(s.names(), ["in.png"]);
}

#[test]
fn standard_streams() {
    let s = Scratch::new();
    let input = std::fs::read(small_png(&s, "in.png")).unwrap();
    let run =
        crate::harness::pumice_with_stdin(&["run", "-", "-o", "-", "--format", "png", "-s", "flip"], &input)
            .ok();
    let out = pumice::io::decode(&run.output.stdout, &pumice::io::DecodeOptions::default()).unwrap();
    assert_eq!((out.width(), out.height()), (4, 3));
}

#[test]
fn recipe_check_prints_canonical_steps() {
    let s = Scratch::new();
    s.write(
        "r.toml",
        b"[options]\ndepth = \"16\"\n[[step]]\nop = \"gauss\"\nsigma = 1.5\n[[step]]\nop = \"gray\"\n",
    );
    let run = pumice(&["recipe", "check", &s.path("r.toml").display().to_string()]).ok();
    assert!(run.stdout().contains("gauss:sigma=1.5,truncate=4,border=reflect,fill=0"), "{}", run.stdout());
}

#[test]
fn ops_lists_and_describes() {
    let list = pumice(&["ops"]).ok().stdout();
    for name in ["gauss", "convolve", "gray", "invert", "gamma", "crop", "flip", "rotate"] {
        assert!(list.contains(name), "`pumice ops` lacks {name}");
    }
    let gauss = pumice(&["ops", "gauss"]).ok().stdout();
    assert!(
        gauss.contains("Domain: linear light") && gauss.contains("sigma") && gauss.contains("scipy"),
        "{gauss}"
    );
    pumice(&["ops", "guass"]).expect_code(2).stderr_has(&["did you mean `gauss`?"]);
}

#[test]
fn completions_and_manual_cover_every_long_flag() {
    let help = pumice(&["run", "--help"]).ok().stdout();
    let flags: Vec<&str> =
        help.split_whitespace().filter(|w| w.starts_with("--")).map(|w| w.trim_end_matches(',')).collect();
    assert!(flags.contains(&"--overwrite") && flags.contains(&"--input-encoding"), "{help}");
    let bash = pumice(&["completions", "bash"]).ok().stdout();
    let man = pumice(&["manual"]).ok().stdout();
    for flag in flags.iter().filter(|f| f.len() > 2 && !f.contains('=') && !f.contains('[')) {
        let flag = flag.trim_end_matches(|c: char| !c.is_ascii_alphanumeric() && c != '-');
        assert!(bash.contains(flag), "bash completions lack {flag}");
        assert!(man.contains(&flag.replace('-', "\\-")) || man.contains(flag), "manual lacks {flag}");
    }
}
