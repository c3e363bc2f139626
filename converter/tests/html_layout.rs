//! The `vet --html` pictures as a browser lays them out: every label inside its picture, no two
//! labels on top of each other, for long class names and for many classes. The page is loaded in
//! headless Chromium, a script measures every SVG `<text>` with `getBoundingClientRect()`, and the
//! test reads its findings from the dumped DOM: a layout check, not a comparison of pixels.
//!
//! Needs `chromium` (Debian's package); without it the test says so and passes, unless
//! `KINGLET_REQUIRE_BROWSER=1` (set by `.ci/run`, which installs it), when that is a failure.
use std::path::{Path, PathBuf};
use std::process::Command;

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

fn kinglet(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

fn browser() -> Option<PathBuf> {
    ["chromium", "chromium-browser"].iter().find_map(|b| {
        let out = Command::new("sh")
            .args(["-c", &format!("command -v {b}")])
            .output()
            .ok()?;
        let p = String::from_utf8_lossy(&out.stdout).trim().to_string();
        (!p.is_empty()).then(|| PathBuf::from(p))
    })
}

/// Measures the page in the browser: one line per problem, plus how many texts were measured.
const CHECK: &str = r#"<script>
(() => {
  const problems = [];
  let texts = 0;
  document.querySelectorAll('svg').forEach((svg, si) => {
    const box = svg.getBoundingClientRect();
    const items = [...svg.querySelectorAll('text')]
      .filter(t => t.textContent.trim() !== '')
      .map(t => ({ t: t.textContent.trim(), r: t.getBoundingClientRect() }));
    texts += items.length;
    for (const a of items) {
      if (a.r.width < 1 || a.r.height < 1) problems.push(`svg ${si}: "${a.t}" has no size (no font?)`);
      if (a.r.left < box.left - 0.5 || a.r.right > box.right + 0.5 ||
          a.r.top < box.top - 0.5 || a.r.bottom > box.bottom + 0.5)
        problems.push(`svg ${si}: "${a.t}" reaches outside the picture`);
    }
    for (let i = 0; i < items.length; i++)
      for (let j = i + 1; j < items.length; j++) {
        const a = items[i].r, b = items[j].r;
        const ox = Math.min(a.right, b.right) - Math.max(a.left, b.left);
        const oy = Math.min(a.bottom, b.bottom) - Math.max(a.top, b.top);
        if (ox > 1 && oy > 1) problems.push(`svg ${si}: "${items[i].t}" overlaps "${items[j].t}"`);
      }
  });
  const pre = document.createElement('pre');
  pre.id = 'layout-check';
  pre.textContent = JSON.stringify({ svgs: document.querySelectorAll('svg').length, texts, problems });
  document.body.appendChild(pre);
})();
</script>"#;

/// Loads `page` with the check in headless Chromium; returns (pictures, texts, problems).
fn measure(chromium: &Path, page: &Path) -> (u64, u64, Vec<String>) {
    let html = std::fs::read_to_string(page).unwrap();
    let checked = page.with_extension("check.html");
    std::fs::write(
        &checked,
        html.replace("</body>", &format!("{CHECK}</body>")),
    )
    .unwrap();
    let profile = tempfile::tempdir().unwrap();
    let out = Command::new(chromium)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--window-size=1400,1000",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg("--dump-dom")
        .arg(format!("file://{}", checked.display()))
        .output()
        .unwrap();
    let dom = String::from_utf8_lossy(&out.stdout);
    let start = dom.find("<pre id=\"layout-check\">").unwrap_or_else(|| {
        panic!(
            "no result in the dumped page: {}",
            String::from_utf8_lossy(&out.stderr)
        )
    });
    let body = &dom[start + "<pre id=\"layout-check\">".len()..];
    let json = body[..body.find("</pre>").unwrap()]
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&");
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    let problems = v["problems"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p.as_str().unwrap().to_string())
        .collect();
    (
        v["svgs"].as_u64().unwrap(),
        v["texts"].as_u64().unwrap(),
        problems,
    )
}

/// Packs `model` twice with `labels` (f32 and int8 on `calibration`) and writes the vet page.
fn report(
    dir: &Path,
    model: &str,
    calibration: &str,
    heldout: &str,
    old_names: &[&str],
    labels: &str,
) -> PathBuf {
    let model = repo(model);
    let m = model.to_str().unwrap();
    let cal = repo(calibration);
    for args in [
        vec!["pack", m, "--float", "--labels", labels, "-o", "f.kgl"],
        vec![
            "pack",
            m,
            "--calibration",
            cal.to_str().unwrap(),
            "--labels",
            labels,
            "-o",
            "q.kgl",
        ],
    ] {
        let o = kinglet(dir, &args);
        assert_eq!(
            o.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
    }
    // The held-out labels with the new names (labels written as class indices stay as they are).
    let new: Vec<&str> = labels.split(',').collect();
    let text = std::fs::read_to_string(repo(heldout)).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let label_at = header.split(',').position(|h| h == "label").unwrap();
    let mut held = vec![header.to_string()];
    for line in lines {
        let mut fields: Vec<String> = line.split(',').map(String::from).collect();
        if let Some(k) = old_names.iter().position(|o| *o == fields[label_at]) {
            fields[label_at] = new[k].to_string();
        }
        held.push(fields.join(","));
    }
    std::fs::write(dir.join("held.csv"), held.join("\n") + "\n").unwrap();
    let o = kinglet(
        dir,
        &[
            "vet", "f.kgl", "q.kgl", "--data", "held.csv", "--label", "label", "--html", "r.html",
        ],
    );
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    dir.join("r.html")
}

#[test]
fn pictures_keep_long_and_many_labels_apart_and_inside() {
    let Some(chromium) = browser() else {
        assert!(
            std::env::var("KINGLET_REQUIRE_BROWSER").as_deref() != Ok("1"),
            "KINGLET_REQUIRE_BROWSER=1 but no chromium on PATH"
        );
        eprintln!("html_layout: SKIPPED: no chromium on PATH (Debian: apt-get install chromium)");
        return;
    };
    let cases = [
        // Four long names (the vibration example's own names cut into each other before).
        (
            "examples/vibration/model.onnx",
            "examples/vibration/calibration.csv",
            "examples/vibration/heldout.csv",
            &["normal", "imbalance", "bearing_wear", "loose_mount"][..],
            "normal_operation,rotor_imbalance,outer_race_bearing_wear,loose_mounting_bolt",
        ),
        // Ten classes in narrow cells.
        (
            "examples/digits/model.onnx",
            "examples/digits/calibration.csv",
            "examples/digits/heldout.csv",
            &[][..],
            "digit_zero,digit_one,digit_two,digit_three,digit_four,digit_five,digit_six,digit_seven,digit_eight,digit_nine",
        ),
    ];
    for (model, cal, held, old, labels) in cases {
        let dir = tempfile::tempdir().unwrap();
        let page = report(dir.path(), model, cal, held, old, labels);
        let (svgs, texts, problems) = measure(&chromium, &page);
        assert_eq!(svgs, 4, "two heat maps, the SQNR bars and the histogram");
        assert!(texts > 20, "{texts} texts measured");
        assert!(
            problems.is_empty(),
            "{model} with {labels}:\n{}",
            problems.join("\n")
        );
    }
}
